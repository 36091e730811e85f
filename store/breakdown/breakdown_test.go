package breakdown

import (
	"errors"
	"reflect"
	"strings"
	"testing"
	"time"

	"riffle/merge"
	"riffle/merge/verdict"
	"riffle/store"
)

// exportLines are four impressions in store.Export's line format: two
// interleaved ones finalised, one still open, and one incumbent-only.
const exportLines = `{"impression":"{A}","time":"2026-03-14T09:00:00Z","experiment":"seedling","user":"00000000000000aa","seed":"1","slots":[{"item":"x","team":"incumbent"},{"item":"y","team":"challenger"},{"item":"z","team":"challenger"}],"events":[{"item":"y","event":"click","time":"2026-03-14T09:00:05Z","slot":2},{"item":"y","event":"purchase","time":"2026-03-14T09:00:09Z","slot":2}],"outcome":"challenger"}
{"impression":"{B}","time":"2026-03-14T23:59:59Z","experiment":"seedling","user":"00000000000000bb","seed":"2","slots":[{"item":"y","team":"challenger"},{"item":"x","team":"incumbent"}],"events":[{"item":"x","event":"click","time":"2026-03-15T00:00:01Z","slot":2}],"outcome":"incumbent"}
{"impression":"{C}","time":"2026-03-15T08:00:00Z","experiment":"seedling","seed":"3","slots":[{"item":"x","team":"incumbent"},{"item":"y","team":"challenger"}],"events":[{"item":"x","event":"click","time":"2026-03-15T08:00:01Z","slot":1}],"outcome":"open"}
{"impression":"{D}","time":"2026-03-15T08:00:01Z","experiment":"seedling","seed":"4","fallback":"ramp","slots":[{"item":"x","team":"incumbent"}],"events":[{"item":"x","event":"click","time":"2026-03-15T08:00:03Z","slot":1}],"outcome":"none"}
{"impression":"{E}","time":"2026-03-15T08:00:02Z","experiment":"other","seed":"5","slots":[{"item":"x","team":"incumbent"}],"events":[],"outcome":"none"}
`

// fixture returns exportLines with real impression ids.
func fixture() string {
	var pairs []string
	for i, k := range []string{"{A}", "{B}", "{C}", "{D}", "{E}"} {
		pairs = append(pairs, k, store.NewID(time.Date(2026, 3, 14, 9, 0, i, 0, time.UTC)).String())
	}
	return strings.NewReplacer(pairs...).Replace(exportLines)
}

// TestReadCountsByHand checks every count against the lines above,
// counted by hand.
func TestReadCountsByHand(t *testing.T) {
	b, err := Read(strings.NewReader(fixture()), "seedling")
	if err != nil {
		t.Fatal(err)
	}
	if b.Impressions != 4 || b.Interleaved != 3 || b.Open != 1 {
		t.Errorf("impressions %d, interleaved %d, open %d; want 4, 3, 1", b.Impressions, b.Interleaved, b.Open)
	}
	if got := b.Events; got["click"] != 4 || got["purchase"] != 1 || len(got) != 2 {
		t.Errorf("events %v, want click 4 (one on the incumbent-only impression), purchase 1", got)
	}
	inc, chal := b.Positions[Incumbent], b.Positions[Challenger]
	checks := []struct {
		name        string
		p           Position
		shown       int64
		click, purc int64
	}{
		{"incumbent slot 1", inc[0], 2, 1, 0},
		{"incumbent slot 2", inc[1], 1, 1, 0},
		{"challenger slot 1", chal[0], 1, 0, 0},
		{"challenger slot 2", chal[1], 2, 1, 1},
		{"challenger slot 3", chal[2], 1, 0, 0},
	}
	for _, c := range checks {
		if c.p.Shown != c.shown || c.p.Events["click"] != c.click || c.p.Events["purchase"] != c.purc {
			t.Errorf("%s: shown %d, events %v; want %d shown, %d clicks, %d purchases", c.name, c.p.Shown, c.p.Events, c.shown, c.click, c.purc)
		}
	}
	if len(inc) != 2 || len(chal) != 3 {
		t.Errorf("positions: incumbent %d, challenger %d; want 2 and 3", len(inc), len(chal))
	}
	if r := chal[1].Rate("click"); r != 0.5 {
		t.Errorf("challenger slot 2 click rate %v, want 0.5", r)
	}
	if len(b.Days) != 2 || b.Days[0].Date != "2026-03-14" || b.Days[0].Outcomes["challenger"] != 1 || b.Days[0].Outcomes["incumbent"] != 1 ||
		b.Days[1].Date != "2026-03-15" || b.Days[1].Outcomes["open"] != 1 {
		t.Errorf("days %+v, want 2026-03-14 {challenger 1, incumbent 1}, 2026-03-15 {open 1}", b.Days)
	}
	want := []Final{{Time: time.Date(2026, 3, 14, 9, 0, 0, 0, time.UTC), User: 0xaa, Outcome: merge.ChallengerWin},
		{Time: time.Date(2026, 3, 14, 23, 59, 59, 0, time.UTC), User: 0xbb, Outcome: merge.IncumbentWin}}
	if len(b.Finals) != 2 || !b.Finals[0].Time.Equal(want[0].Time) || b.Finals[0].User != want[0].User || b.Finals[0].Outcome != want[0].Outcome || b.Finals[1].Outcome != want[1].Outcome {
		t.Errorf("finals %+v, want %+v", b.Finals, want)
	}
}

// TestAddEqualsOneRead checks that reading the lines in two parts and
// adding them gives what reading them at once does.
func TestAddEqualsOneRead(t *testing.T) {
	fx := fixture()
	lines := strings.SplitAfter(fx, "\n")
	whole, err := Read(strings.NewReader(fx), "seedling")
	if err != nil {
		t.Fatal(err)
	}
	first, err := Read(strings.NewReader(lines[1]+lines[3]), "seedling")
	if err != nil {
		t.Fatal(err)
	}
	second, err := Read(strings.NewReader(lines[0]+lines[2]+lines[4]), "seedling")
	if err != nil {
		t.Fatal(err)
	}
	first.Add(second)
	if !reflect.DeepEqual(first, whole) {
		t.Errorf("added:\n%+v\nread at once:\n%+v", first, whole)
	}
}

func TestReadRejectsBadLines(t *testing.T) {
	for _, tc := range []struct{ name, in string }{
		{"not json", "{\n"},
		{"bad time", `{"experiment":"e","time":"yesterday","outcome":"open"}`},
		{"bad outcome", `{"experiment":"e","time":"2026-03-14T09:00:00Z","outcome":"won"}`},
		{"bad user", `{"experiment":"e","time":"2026-03-14T09:00:00Z","user":"zz","outcome":"tie"}`},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Read(strings.NewReader("\n"+tc.in), "e")
			if !errors.Is(err, ErrLine) || !strings.Contains(err.Error(), "line 2") {
				t.Errorf("Read: %v, want an ErrLine naming line 2", err)
			}
		})
	}
}

// TestTimelineEndsAtTheVerdict checks that the last point is the verdict
// package's status over all outcomes, and that the decision found is the
// shortest decided prefix.
func TestTimelineEndsAtTheVerdict(t *testing.T) {
	var finals []Final
	t0 := time.Date(2026, 3, 14, 9, 0, 0, 0, time.UTC)
	in := verdict.Input{Users: map[uint64][4]int64{}}
	for i := range 400 {
		o := merge.ChallengerWin
		if i%3 == 0 {
			o = merge.IncumbentWin
		}
		if i%7 == 0 {
			o = merge.NoFeedback
		}
		u := uint64(i%50 + 1)
		finals = append(finals, Final{Time: t0.Add(time.Duration(i) * time.Second), User: u, Outcome: o})
		in.Outcomes[o]++
		c := in.Users[u]
		c[o]++
		in.Users[u] = c
	}
	in.Impressions, in.Interleaved = 400, 400
	want, err := verdict.Compute(in)
	if err != nil {
		t.Fatal(err)
	}
	pts, dec, err := Timeline(finals, verdict.Params{}, 20)
	if err != nil {
		t.Fatal(err)
	}
	last := pts[len(pts)-1]
	if len(pts) != 20 || last.Delta != want.Delta || last.CSDelta != want.CSDelta || last.CI != want.CI || last.Verdict != want.Verdict {
		t.Errorf("%d points, last %+v; want 20 points, last Delta %v cs %v ci %v %s", len(pts), last, want.Delta, want.CSDelta, want.CI, want.Verdict)
	}
	if want.Verdict == verdict.Undecided || dec == nil {
		t.Fatalf("fixture should decide: verdict %s, decision %v", want.Verdict, dec)
	}
	before, err := at(finals, dec.Finals-1, verdict.Params{})
	if err != nil {
		t.Fatal(err)
	}
	if dec.Verdict == verdict.Undecided || before.Verdict != verdict.Undecided {
		t.Errorf("decision at %d finals is %s, the prefix before it %s; want decided after undecided", dec.Finals, dec.Verdict, before.Verdict)
	}
}
