package feedback

import (
	"errors"
	"strings"
	"testing"
	"time"

	"riffle/store"
)

func TestParseTime(t *testing.T) {
	// The examples of RFC 3339 section 5.8, with the instants they denote.
	tests := []struct {
		in   string
		want time.Time
	}{
		{"1985-04-12T23:20:50.52Z", time.Date(1985, 4, 12, 23, 20, 50, 520000000, time.UTC)},
		{"1996-12-19T16:39:57-08:00", time.Date(1996, 12, 20, 0, 39, 57, 0, time.UTC)},
		{"1990-12-31T23:59:60Z", time.Date(1991, 1, 1, 0, 0, 0, 0, time.UTC)}, // leap second
		{"1990-12-31T15:59:60-08:00", time.Date(1991, 1, 1, 0, 0, 0, 0, time.UTC)},
		{"1937-01-01T12:00:27.87+00:20", time.Date(1937, 1, 1, 11, 40, 27, 870000000, time.UTC)},
	}
	for _, tc := range tests {
		got, err := parseTime(tc.in)
		if err != nil || !got.Equal(tc.want) {
			t.Errorf("parseTime(%q) = %v, %v; want %v", tc.in, got, err, tc.want)
		}
	}
	for _, bad := range []string{"1985-04-12 23:20:50Z", "1985-04-12T23:20:61Z", "yesterday", ""} {
		if _, err := parseTime(bad); err == nil {
			t.Errorf("parseTime(%q) succeeded", bad)
		}
	}
}

func TestParseLineFields(t *testing.T) {
	id := store.NewID(time.Unix(1700000000, 0))
	now := time.Unix(1700000100, 0)
	tests := []struct {
		in   string
		want store.Event
	}{
		{`{"impression":"` + id.String() + `","item":"rake","event":"click"}`, store.Event{Impression: id, Item: "rake", Type: "click", Time: now}},
		{`{"impression":"` + id.String() + `","item":10234,"event":"purchase","key":"o-1","time":"2023-11-14T22:15:00Z"}`,
			store.Event{Impression: id, Item: "10234", Type: "purchase", Key: "o-1", Time: time.Unix(1700000100, 0)}},
		{`{"item":"a\u00e9","impression":"` + id.String() + `","event":"click"}`, store.Event{Impression: id, Item: "aé", Type: "click", Time: now}},
	}
	for _, tc := range tests {
		got, err := parseLine([]byte(tc.in), now)
		if err != nil || got.Impression != tc.want.Impression || got.Item != tc.want.Item || got.Type != tc.want.Type ||
			got.Key != tc.want.Key || !got.Time.Equal(tc.want.Time) {
			t.Errorf("parseLine(%s) = %+v, %v; want %+v", tc.in, got, err, tc.want)
		}
	}
}

func TestParseBodyLineNumbers(t *testing.T) {
	id := store.NewID(time.Unix(1700000000, 0)).String()
	ok := `{"impression":"` + id + `","item":"rake","event":"click"}`
	body := "\n" + ok + "\r\n\n  \nnope\n" + ok
	var got []int
	for _, l := range parseBody([]byte(body), time.Now()) {
		got = append(got, l.n)
	}
	if want := []int{2, 5, 6}; !equalInts(got, want) {
		t.Errorf("line numbers %v, want %v", got, want)
	}
}

func equalInts(a, b []int) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// FuzzParseBody: any body parses without panicking into lines whose numbers
// rise and stay within the body, each either a complete event or an error
// that names its reason.
func FuzzParseBody(f *testing.F) {
	id := store.NewID(time.Unix(1700000000, 0)).String()
	f.Add(`{"impression":"` + id + `","item":"rake","event":"click","time":"2026-04-01T12:00:00Z","key":"k"}`)
	f.Add("{\n\"impression\": \"" + id + "\",\n\"item\": 7,\n\"event\": \"click\"\n}")
	f.Add("x\n{}\n[]\n{\"impression\":1}\n\n")
	f.Add(`{"impression":"` + id + `","item":"a","event":"b","time":"1990-12-31T23:59:60Z"}`)
	now := time.Unix(1700000100, 0)
	f.Fuzz(func(t *testing.T, body string) {
		lines := parseBody([]byte(body), now)
		last, total := 0, strings.Count(body, "\n")+1
		for _, l := range lines {
			if l.n <= last || l.n > total {
				t.Fatalf("line number %d after %d in a %d-line body", l.n, last, total)
			}
			last = l.n
			if l.err != nil {
				var pe *parseError
				if !errors.As(l.err, &pe) || (pe.reason != reasonMalformed && pe.reason != reasonInvalid) || pe.msg == "" {
					t.Fatalf("line %d: error %v has no reason", l.n, l.err)
				}
				continue
			}
			if l.ev.Item == "" || l.ev.Type == "" {
				t.Fatalf("line %d: incomplete event %+v", l.n, l.ev)
			}
		}
	})
}

// TestParseLineMalformedReasons checks that a line that is not JSON at all
// is reported as such (with the decoder's own words), and a line that is
// JSON but not an object names what it is.
func TestParseLineMalformedReasons(t *testing.T) {
	tests := []struct{ in, want string }{
		{"not json", "malformed JSON: invalid character 'o' in literal null (expecting 'u')"},
		{"garbage", "malformed JSON: invalid character 'g' looking for beginning of value"},
		{"[1,2]", "malformed JSON: want an object, have array"},
		{`"rake"`, "malformed JSON: want an object, have string"},
		{"42", "malformed JSON: want an object, have number"},
		{"null", "malformed JSON: want an object, have null"},
	}
	for _, tc := range tests {
		_, err := parseLine([]byte(tc.in), time.Now())
		if err == nil || err.Error() != tc.want {
			t.Errorf("parseLine(%q) error %v, want %q", tc.in, err, tc.want)
		}
	}
}
