package simulate

import (
	"errors"
	"slices"
	"strings"
	"testing"
)

// The formats follow trec_eval's documentation (recalled from memory):
// qrels lines are "topic iteration document relevance", run lines
// "topic Q0 document rank score tag", ordered by score.

func TestReadQrels(t *testing.T) {
	in := "401 0 FT-1 2\n401 0 FT-2 0\n\n  402\t0 LA-9   7\n402 0 LA-3 -2\n"
	got, err := ReadQrels(strings.NewReader(in), "q.txt")
	if err != nil {
		t.Fatal(err)
	}
	want := Qrels{"401": {"FT-1": 2, "FT-2": 0}, "402": {"LA-9": 4, "LA-3": 0}}
	for topic, docs := range want {
		for doc, g := range docs {
			if got[topic][doc] != g {
				t.Errorf("topic %s doc %s: grade %d, want %d", topic, doc, got[topic][doc], g)
			}
		}
	}
	if len(got) != 2 || len(got["401"]) != 2 {
		t.Errorf("read %v, want %v", got, want)
	}
}

func TestReadQrelsErrors(t *testing.T) {
	tests := []struct{ in, want string }{
		{"401 0 FT-1\n", "q.txt:1: syntax error: want 4 fields"},
		{"401 0 FT-1 2\n401 0 FT-1 1\n", "q.txt:2: syntax error: document \"FT-1\" judged twice"},
		{"\n401 0 FT-1 high\n", "q.txt:2: syntax error: relevance \"high\" is not an integer"},
		{"401 0 FT-1 2 extra\n", "want 4 fields"},
		{strings.Repeat("x", maxLine+1), "q.txt:1: syntax error"},
	}
	for _, tc := range tests {
		_, err := ReadQrels(strings.NewReader(tc.in), "q.txt")
		if !errors.Is(err, ErrSyntax) || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%.30q: err %v, want ErrSyntax saying %q", tc.in, err, tc.want)
		}
	}
}

func TestReadRun(t *testing.T) {
	in := strings.Join([]string{
		"401 Q0 FT-3 3 0.5 sys",
		"401 Q0 FT-1 1 2.5 sys",
		"401 Q0 FT-2 2 0.5 sys", // ties FT-3 on score: the rank field breaks it
		"402 Q0 LA-1 1 -1e3 sys",
		"402 Q0 LA-0 1 -1e3 sys", // ties on score and rank: the name breaks it
	}, "\n")
	got, err := ReadRun(strings.NewReader(in), "a.run")
	if err != nil {
		t.Fatal(err)
	}
	want := Ranking{"401": {"FT-1", "FT-2", "FT-3"}, "402": {"LA-0", "LA-1"}}
	for topic, docs := range want {
		if !slices.Equal(got[topic], docs) {
			t.Errorf("topic %s: %v, want %v", topic, got[topic], docs)
		}
	}
}

func TestReadRunErrors(t *testing.T) {
	tests := []struct{ in, want string }{
		{"401 Q0 FT-1 1 2.5\n", "a.run:1: syntax error: want 6 fields"},
		{"401 Q0 FT-1 first 2.5 s\n", "rank \"first\" is not an integer"},
		{"401 Q0 FT-1 1 NaN s\n", "score \"NaN\" is not a number"},
		{"401 Q0 FT-1 1 2 s\n401 Q0 FT-1 2 1 s\n", "a.run:2: syntax error: document \"FT-1\" retrieved twice"},
	}
	for _, tc := range tests {
		_, err := ReadRun(strings.NewReader(tc.in), "a.run")
		if !errors.Is(err, ErrSyntax) || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%q: err %v, want ErrSyntax saying %q", tc.in, err, tc.want)
		}
	}
}

func TestJudge(t *testing.T) {
	q := Qrels{"1": {"d1": 3, "d2": 0}, "2": {"d5": 1}, "3": {"d9": 0}, "4": {"d7": 2}}
	a := Ranking{"1": {"d1", "d2", "d3"}, "2": {"d5"}, "3": {"d9"}}
	b := Ranking{"1": {"d3", "d1"}, "2": {"d6", "d5"}, "3": {"d9"}, "4": {"d7"}}
	got, err := Judge(q, a, b, 2)
	if err != nil {
		t.Fatal(err)
	}
	// Topic 3 has nothing relevant, topic 4 is missing from run a.
	if len(got) != 2 || got[0].ID != "1" || got[1].ID != "2" {
		t.Fatalf("queries %+v, want topics 1 and 2", got)
	}
	if !slices.Equal(got[0].A, []string{"d1", "d2"}) || !slices.Equal(got[1].B, []string{"d6", "d5"}) {
		t.Errorf("lists %v / %v, want each run cut to 2", got[0].A, got[1].B)
	}
	if _, err := Judge(q, Ranking{}, b, 2); !errors.Is(err, ErrNoQueries) {
		t.Errorf("no shared topic: err %v, want ErrNoQueries", err)
	}
}

// FuzzReadQrels checks that any input either fails with ErrSyntax or reads
// into grades within 0..MaxGrade.
func FuzzReadQrels(f *testing.F) {
	for _, s := range []string{"401 0 FT-1 2\n", "1 0 a -3\n1 0 b 9", "x", "1 0 a 1\n1 0 a 1\n", "\n\n\t\n"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, in string) {
		q, err := ReadQrels(strings.NewReader(in), "fuzz")
		if err != nil {
			if !errors.Is(err, ErrSyntax) {
				t.Fatalf("error %v does not wrap ErrSyntax", err)
			}
			return
		}
		for _, docs := range q {
			for d, g := range docs {
				if g < 0 || g > MaxGrade {
					t.Fatalf("document %q graded %d", d, g)
				}
			}
		}
	})
}

// FuzzReadRun checks that any input either fails with ErrSyntax or reads
// into lists without repeats.
func FuzzReadRun(f *testing.F) {
	for _, s := range []string{"401 Q0 FT-1 1 2.5 s\n", "1 Q0 a 1 1 s\n1 Q0 b 1 1 s", "1 Q0 a x 1 s", "1 Q0 a 1 Inf s"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, in string) {
		r, err := ReadRun(strings.NewReader(in), "fuzz")
		if err != nil {
			if !errors.Is(err, ErrSyntax) {
				t.Fatalf("error %v does not wrap ErrSyntax", err)
			}
			return
		}
		for topic, docs := range r {
			seen := map[string]bool{}
			for _, d := range docs {
				if seen[d] {
					t.Fatalf("topic %q lists %q twice", topic, d)
				}
				seen[d] = true
			}
		}
	})
}
