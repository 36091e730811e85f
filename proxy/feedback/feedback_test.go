package feedback

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"log/slog"
	"net/http"
	"net/http/httptest"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/testutil/promlint"

	"riffle/merge"
	"riffle/store"
)

// t0 is an arbitrary fixed instant; the shown impression is served at t0.
var t0 = time.Date(2026, 4, 1, 12, 0, 0, 0, time.UTC)

// fixture is a real store in t.TempDir() behind a real loopback server.
type fixture struct {
	st  *store.Store
	srv *httptest.Server
	reg *prometheus.Registry
	im  *store.Impression // served at t0
	// later is served at t0+50m, so it is still open after Finalize(t0+1h).
	later *store.Impression
}

func newFixture(t *testing.T, o Options) *fixture {
	t.Helper()
	path := filepath.Join(t.TempDir(), "riffle.db")
	now := func() time.Time { return t0.Add(time.Minute) }
	st, err := store.Open(path, &store.Options{Now: now, FinalizeEvery: -1})
	if err != nil {
		t.Fatal(err)
	}
	im := &store.Impression{ID: store.NewID(t0), Time: t0, Experiment: "spring-refresh", Policy: "team-draft",
		Slots: []merge.Slot{
			{Item: "rake", Team: merge.Incumbent, RankA: 1, RankB: 2},
			{Item: "hoe", Team: merge.Challenger, RankB: 1},
		}}
	im.Seed = im.ID.Seed()
	later := *im
	later.ID = store.NewID(t0.Add(50 * time.Minute))
	later.Time, later.Seed = later.ID.Time(), later.ID.Seed()
	if !st.Record(im) || !st.Record(&later) {
		t.Fatal("Record = false")
	}
	f := &fixture{st: st, reg: prometheus.NewRegistry(), im: im, later: &later}
	if o.Now == nil {
		o.Now = now
	}
	o.Registerer = f.reg
	f.srv = httptest.NewServer(New(st, o))
	t.Cleanup(func() {
		f.srv.Close()
		if err := st.Close(); err != nil {
			t.Error(err)
		}
		if err := store.Verify(path); err != nil {
			t.Error(err)
		}
	})
	return f
}

// post sends body and returns the status and decoded answer.
func (f *fixture) post(t *testing.T, body string) (int, Response) {
	t.Helper()
	resp, err := http.Post(f.srv.URL, "application/x-ndjson", strings.NewReader(body))
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	raw, _ := io.ReadAll(resp.Body)
	var r Response
	if err := json.Unmarshal(raw, &r); err != nil {
		t.Fatalf("answer %q is not JSON: %v", raw, err)
	}
	if got := resp.Header.Get("Content-Type"); got != "application/json" {
		t.Errorf("Content-Type %q, want application/json", got)
	}
	return resp.StatusCode, r
}

// ev renders one event line for the fixture's impression.
func (f *fixture) ev(item, typ, extra string) string {
	return fmt.Sprintf(`{"impression":%q,"item":%q,"event":%q%s}`, f.im.ID, item, typ, extra)
}

// rejected returns riffle_feedback_events_rejected_total{reason}.
func (f *fixture) rejected(reason string) float64 {
	return f.value("riffle_feedback_events_rejected_total", reason)
}

// value returns the gathered value of the counter series name{label}, or
// -1 when there is none.
func (f *fixture) value(name, label string) float64 {
	c, err := f.reg.Gather()
	if err != nil {
		panic(err)
	}
	for _, mf := range c {
		if mf.GetName() != name {
			continue
		}
		for _, m := range mf.GetMetric() {
			if m.GetLabel()[0].GetValue() == label {
				return m.GetCounter().GetValue()
			}
		}
	}
	return -1
}

func TestOneJSONEvent(t *testing.T) {
	f := newFixture(t, Options{})
	body := "\n{\n  \"impression\": \"" + f.im.ID.String() + "\",\n  \"item\": \"hoe\",\n  \"event\": \"click\",\n  \"time\": \"2026-04-01T12:00:05Z\"\n}\n"
	status, r := f.post(t, body)
	if status != http.StatusAccepted || r.Accepted != 1 || len(r.Rejected) != 0 {
		t.Errorf("pretty-printed single event: %d %+v; want 202, accepted 1", status, r)
	}
}

func TestNDJSONBatch(t *testing.T) {
	f := newFixture(t, Options{})
	body := strings.Join([]string{
		f.ev("rake", "click", `,"time":"2026-04-01T12:00:05+02:00"`), // 10:00:05Z, before t0: too early
		"",
		f.ev("hoe", "click", `,"time":"2026-04-01T12:00:05.25Z"`),
		`{"impression": "` + f.im.ID.String() + `", "item": "hoe"`,
		f.ev("hoe", "purchase", `,"key":"order-1"`),
	}, "\r\n")
	status, r := f.post(t, body)
	if status != http.StatusAccepted || r.Accepted != 2 || r.Duplicates != 0 {
		t.Fatalf("batch: %d %+v; want 202, accepted 2", status, r)
	}
	if len(r.Rejected) != 2 || r.Rejected[0].Line != 1 || r.Rejected[1].Line != 4 {
		t.Fatalf("rejected %+v; want lines 1 and 4", r.Rejected)
	}
	if !strings.Contains(r.Rejected[0].Error, "before its impression") || !strings.Contains(r.Rejected[1].Error, "malformed JSON") {
		t.Errorf("rejection reasons %+v", r.Rejected)
	}
	if got := f.value("riffle_feedback_events_accepted_total", "click"); got != 1 {
		t.Errorf("accepted{event=click} = %v, want 1", got)
	}
}

// TestRejectReasons gives every rejection its own case, with the reason it
// is counted under and a phrase its message must hold.
func TestRejectReasons(t *testing.T) {
	tests := []struct {
		name, reason, says string
		line               func(f *fixture) string
		setup              func(t *testing.T, f *fixture)
	}{
		{"not JSON", reasonMalformed, "malformed JSON", func(*fixture) string { return `impression=abc` }, nil},
		{"array", reasonMalformed, "want an object, have array", func(*fixture) string { return `[1,2]` }, nil},
		{"two values", reasonMalformed, "more than one value", func(f *fixture) string { return f.ev("hoe", "click", "") + " {}" }, nil},
		{"missing impression", reasonInvalid, `missing "impression"`, func(*fixture) string { return `{"item":"hoe","event":"click"}` }, nil},
		{"bad impression id", reasonInvalid, "want 26 characters", func(*fixture) string { return `{"impression":"abc","item":"hoe","event":"click"}` }, nil},
		{"missing item", reasonInvalid, `missing "item"`, func(f *fixture) string { return fmt.Sprintf(`{"impression":%q,"event":"click"}`, f.im.ID) }, nil},
		{"item not a string", reasonInvalid, "want a string or a number, have boolean", func(f *fixture) string { return strings.Replace(f.ev("x", "click", ""), `"x"`, "true", 1) }, nil},
		{"missing event", reasonInvalid, `missing "event"`, func(f *fixture) string { return fmt.Sprintf(`{"impression":%q,"item":"hoe"}`, f.im.ID) }, nil},
		{"event not a string", reasonInvalid, `field "event": want a string`, func(f *fixture) string { return strings.Replace(f.ev("hoe", "x", ""), `"x"`, "3", 1) }, nil},
		{"bad time", reasonInvalid, "not an RFC 3339 time", func(f *fixture) string { return f.ev("hoe", "click", `,"time":"2026-04-01 12:00"`) }, nil},
		{"misspelt field", reasonInvalid, `unknown field "itme"`, func(f *fixture) string { return f.ev("hoe", "click", `,"itme":"x"`) }, nil},
		{"unknown impression", reasonUnknownImpression, "unknown impression", func(*fixture) string {
			return fmt.Sprintf(`{"impression":%q,"item":"hoe","event":"click"}`, store.NewID(t0))
		}, nil},
		{"item not shown", reasonItemNotShown, "item not shown", func(f *fixture) string { return f.ev("hose", "click", "") }, nil},
		{"unknown event", reasonUnknownEvent, "unknown event type", func(f *fixture) string { return f.ev("hoe", "wishlist", "") }, nil},
		{"too early", reasonTooEarly, "is 1m0s before its impression (served at 2026-04-01T12:00:00Z), more than the allowed clock skew of 30s",
			func(f *fixture) string { return f.ev("hoe", "click", `,"time":"2026-04-01T11:59:00Z"`) }, nil},
		{"zero time", reasonInvalid, "the zero time, a missing time", func(f *fixture) string { return f.ev("hoe", "click", `,"time":"0001-01-01T00:00:00Z"`) }, nil},
		{"too late", reasonTooLate, "after the attribution window", func(f *fixture) string { return f.ev("hoe", "click", `,"time":"2026-04-01T12:30:01Z"`) }, nil},
		{"final", reasonTooLate, "already final", func(f *fixture) string { return f.ev("hoe", "click", `,"time":"2026-04-01T12:10:00Z"`) },
			func(t *testing.T, f *fixture) {
				if err := f.st.Flush(t.Context()); err != nil {
					t.Fatal(err)
				}
				if n, err := f.st.Finalize(context.Background(), t0.Add(time.Hour)); n != 1 || err != nil {
					t.Fatalf("Finalize = %d, %v", n, err)
				}
			}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			f := newFixture(t, Options{})
			if tc.setup != nil {
				tc.setup(t, f)
			}
			good := fmt.Sprintf(`{"impression":%q,"item":"rake","event":"click","time":"2026-04-01T12:55:00Z"}`, f.later.ID)
			status, r := f.post(t, good+"\n"+tc.line(f)+"\n")
			if status != http.StatusAccepted || r.Accepted != 1 || len(r.Rejected) != 1 {
				t.Fatalf("answer %d %+v; want 202 with 1 accepted, 1 rejected", status, r)
			}
			if r.Rejected[0].Line != 2 || !strings.Contains(r.Rejected[0].Error, tc.says) {
				t.Errorf("rejection %+v; want line 2 saying %q", r.Rejected[0], tc.says)
			}
			if got := f.rejected(tc.reason); got != 1 {
				t.Errorf("rejected{reason=%q} = %v, want 1", tc.reason, got)
			}
		})
	}
}

func TestReplayIsIdempotent(t *testing.T) {
	f := newFixture(t, Options{})
	batch := f.ev("hoe", "click", "") + "\n" + f.ev("hoe", "purchase", `,"key":"order-5"`) + "\n" + f.ev("rake", "click", `,"time":"2026-04-01T12:00:30Z"`) + "\n"
	if status, r := f.post(t, batch); status != http.StatusAccepted || r.Accepted != 3 {
		t.Fatalf("first send: %d %+v", status, r)
	}
	status, r := f.post(t, batch)
	if status != http.StatusAccepted || r.Accepted != 0 || r.Duplicates != 3 || len(r.Rejected) != 0 {
		t.Fatalf("replay: %d %+v; want 202, 0 accepted, 3 duplicates", status, r)
	}
	// The metric's help text promises duplicates are counted under
	// reason="duplicate"; the first send's three lines are accepted, one
	// per event type.
	if got := f.rejected("duplicate"); got != 3 {
		t.Errorf("rejected{reason=duplicate} = %v after replaying 3 events, want 3", got)
	}
	for typ, want := range map[string]float64{"click": 2, "purchase": 1} {
		if got := f.value("riffle_feedback_events_accepted_total", typ); got != want {
			t.Errorf("accepted{event=%s} = %v, want %v (first send only)", typ, got, want)
		}
	}
	if _, err := f.st.Finalize(context.Background(), t0.Add(time.Hour)); err != nil {
		t.Fatal(err)
	}
	agg, err := f.st.Aggregate(context.Background(), "spring-refresh")
	if err != nil {
		t.Fatal(err)
	}
	// Team-draft credit (Radlinski, Kurup & Joachims 2008): hoe is the
	// challenger's (click 1 + purchase 3), rake the incumbent's (1): one
	// challenger win, counted once despite the replay.
	if agg.Outcomes != [4]int64{0, 0, 1, 0} {
		t.Errorf("outcomes %v, want [0 0 1 0]", agg.Outcomes)
	}
	var buf strings.Builder
	if err := f.st.Export(context.Background(), &buf, time.Time{}); err != nil {
		t.Fatal(err)
	}
	if n := strings.Count(buf.String(), `"event":`); n != 3 {
		t.Errorf("export holds %d events, want 3", n)
	}
}

func TestWholeRequestFailures(t *testing.T) {
	f := newFixture(t, Options{MaxBodyBytes: 200})
	tests := []struct {
		name, body string
		status     int
		says       string
	}{
		{"empty body", " \n\n", http.StatusBadRequest, "empty body"},
		{"nothing readable", "{\nnot json\n", http.StatusBadRequest, "no event could be read"},
		{"over the limit", strings.Repeat(f.ev("hoe", "click", "")+"\n", 3), http.StatusRequestEntityTooLarge, "200-byte limit"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			status, r := f.post(t, tc.body)
			if status != tc.status || !strings.Contains(r.Error, tc.says) {
				t.Errorf("answer %d %+v; want %d saying %q", status, r, tc.status, tc.says)
			}
		})
	}
	resp, err := http.Get(f.srv.URL)
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != http.StatusMethodNotAllowed || resp.Header.Get("Allow") != "POST" {
		t.Errorf("GET: %d, Allow %q; want 405, POST", resp.StatusCode, resp.Header.Get("Allow"))
	}
}

func TestStoreFailureIs503(t *testing.T) {
	f := newFixture(t, Options{Logger: slog.New(slog.DiscardHandler)})
	f.st.Close()
	resp, err := http.Post(f.srv.URL, "", strings.NewReader(f.ev("hoe", "click", "")))
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	if resp.StatusCode != http.StatusServiceUnavailable || resp.Header.Get("Retry-After") == "" {
		t.Errorf("closed store: %d, Retry-After %q; want 503 with Retry-After", resp.StatusCode, resp.Header.Get("Retry-After"))
	}
	if got := f.rejected(reasonStore); got != 1 {
		t.Errorf("rejected{reason=store} = %v, want 1", got)
	}
}

func TestMetricsLint(t *testing.T) {
	f := newFixture(t, Options{})
	f.post(t, f.ev("hoe", "click", ""))
	New(f.st, Options{Registerer: f.reg}) // a rebuilt handler shares the counters
	mfs, err := f.reg.Gather()
	if err != nil {
		t.Fatal(err)
	}
	problems, err := promlint.NewWithMetricFamilies(mfs).Lint()
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range problems {
		t.Errorf("promlint: %s: %s", p.Metric, p.Text)
	}
	if got := f.value("riffle_feedback_events_accepted_total", "click"); got != 1 {
		t.Errorf("accepted{event=click} = %v after a rebuild, want 1", got)
	}
}

// downStore answers every event as a store whose database is down would.
type downStore struct{}

func (downStore) AddEvents(_ context.Context, evs []store.Event) []error {
	errs := make([]error, len(evs))
	for i := range errs {
		errs[i] = fmt.Errorf("store postgres: add events: %w", store.ErrUnavailable)
	}
	return errs
}

func TestUnavailableIs503WithReason(t *testing.T) {
	srv := httptest.NewServer(New(downStore{}, Options{Logger: slog.New(slog.DiscardHandler)}))
	defer srv.Close()
	id := store.NewID(t0).String()
	resp, err := http.Post(srv.URL, "application/x-ndjson", strings.NewReader(`{"impression":"`+id+`","item":"rake","event":"click"}`))
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	var r Response
	if err := json.NewDecoder(resp.Body).Decode(&r); err != nil {
		t.Fatal(err)
	}
	if resp.StatusCode != http.StatusServiceUnavailable || resp.Header.Get("Retry-After") == "" ||
		r.Accepted != 0 || !strings.Contains(r.Error, "store unavailable") {
		t.Errorf("database down: %d, Retry-After %q, %+v; want 503, Retry-After, accepted 0, an error saying the store is unavailable",
			resp.StatusCode, resp.Header.Get("Retry-After"), r)
	}
}
