package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"riffle/merge"
	"riffle/merge/verdict"
	"riffle/store"
)

// reportEpoch is the report tests' start of traffic: an arbitrary instant.
var reportEpoch = time.Date(2026, 4, 6, 8, 0, 0, 0, time.UTC)

// planned is one impression a test writes: who saw it, when after the
// epoch, and how its feedback turns out.
type planned struct {
	experiment string
	user       string
	at         time.Duration
	outcome    merge.Outcome
	fallback   string // empty: interleaved
}

// trafficMix is the share of interleaved impressions each outcome gets
// (the rest get no feedback), and the share of impressions that are
// incumbent-only.
type trafficMix struct {
	Challenger, Incumbent, Tie, Fallback float64
}

// plannedTraffic draws n impressions of a garden-supply shop's shoppers
// (users shopper-0 ... shopper-(users-1)), one every step from the epoch,
// with outcomes drawn from mix.
func plannedTraffic(r *rand.Rand, exp string, n, users int, step time.Duration, mix trafficMix) []planned {
	out := make([]planned, 0, n)
	for i := range n {
		p := planned{experiment: exp, user: fmt.Sprintf("shopper-%d", r.IntN(users)), at: time.Duration(i) * step}
		if r.Float64() < mix.Fallback {
			p.fallback = "ramp"
		} else {
			switch u := r.Float64(); {
			case u < mix.Challenger:
				p.outcome = merge.ChallengerWin
			case u < mix.Challenger+mix.Incumbent:
				p.outcome = merge.IncumbentWin
			case u < mix.Challenger+mix.Incumbent+mix.Tie:
				p.outcome = merge.Tie
			}
		}
		out = append(out, p)
	}
	return out
}

// writeStore writes the planned impressions and their feedback to a new
// store at path through the store's own API, finalises them all, and
// closes it.
func writeStore(tb testing.TB, path string, imps []planned) {
	tb.Helper()
	st, err := store.Open(path, writeOptions())
	if err != nil {
		tb.Fatal(err)
	}
	fill(tb, st, imps)
}

// writeOptions are the options writeStore opens a store with.
func writeOptions() *store.Options {
	return &store.Options{FinalizeEvery: -1, QueueSize: 1 << 16, Batch: 8192,
		Now: func() time.Time { return reportEpoch }}
}

// fill writes the planned impressions and their feedback to st, finalises
// them all, and closes it.
func fill(tb testing.TB, st store.Contract, imps []planned) {
	tb.Helper()
	ctx := context.Background()
	var events []store.Event
	var last time.Time
	for _, p := range imps {
		at := reportEpoch.Add(p.at)
		if at.After(last) {
			last = at
		}
		im := &store.Impression{ID: store.NewID(at), Time: at, Experiment: p.experiment, User: store.HashUser(p.user),
			Policy: "team-draft", Fallback: p.fallback, Slots: []merge.Slot{
				{Item: "brass-hose-nozzle", Team: merge.Incumbent, RankA: 1, RankB: 2},
				{Item: "cedar-raised-bed", Team: merge.Challenger, RankA: 0, RankB: 1},
			}}
		im.Seed = im.ID.Seed()
		if p.fallback != "" {
			im.Policy, im.Slots[1].Team = "", merge.Incumbent
		}
		for !st.Record(im) {
			if err := st.Flush(ctx); err != nil {
				tb.Fatal(err)
			}
		}
		click := func(item string) {
			events = append(events, store.Event{Impression: im.ID, Item: item, Type: "click", Time: at.Add(time.Minute)})
		}
		switch p.outcome {
		case merge.IncumbentWin:
			click("brass-hose-nozzle")
		case merge.ChallengerWin:
			click("cedar-raised-bed")
		case merge.Tie:
			click("brass-hose-nozzle")
			click("cedar-raised-bed")
		}
	}
	if err := st.Flush(ctx); err != nil {
		tb.Fatal(err)
	}
	addEvents(tb, st, events)
	if _, err := st.Finalize(context.Background(), last.Add(time.Hour)); err != nil {
		tb.Fatal(err)
	}
	if err := st.Close(); err != nil {
		tb.Fatal(err)
	}
}

// addEvents records events in chunks, failing on any refused.
func addEvents(tb testing.TB, st store.EventAdder, events []store.Event) {
	tb.Helper()
	for len(events) > 0 {
		chunk := events[:min(len(events), 20000)]
		events = events[len(chunk):]
		for i, err := range st.AddEvents(context.Background(), chunk) {
			if err != nil {
				tb.Fatalf("event %d: %v", i, err)
			}
		}
	}
}

// Two sidecars serve the same hour to overlapping shoppers; the report over
// both files must equal the report over one file holding all impressions.
func TestReportTwoStoresEqualOne(t *testing.T) {
	r := rand.New(rand.NewPCG(41, 43))
	a := plannedTraffic(r, "spring-refresh", 1500, 300, time.Second, trafficMix{0.22, 0.18, 0.05, 0.1})
	b := plannedTraffic(r, "spring-refresh", 1500, 300, time.Second, trafficMix{0.22, 0.18, 0.05, 0.1})
	dir := t.TempDir()
	pa, pb, pab := filepath.Join(dir, "a.db"), filepath.Join(dir, "b.db"), filepath.Join(dir, "ab.db")
	writeStore(t, pa, a)
	writeStore(t, pb, b)
	writeStore(t, pab, append(append([]planned{}, a...), b...))
	for _, format := range []string{"json", "text"} {
		code, two, errOut := runCmd(t, runReport, "--store", pa, "--store", pb, "--format", format)
		if code != 0 {
			t.Fatalf("report on two stores: exit %d: %s", code, errOut)
		}
		code, one, errOut := runCmd(t, runReport, "--store", pab, "--format", format)
		if code != 0 {
			t.Fatalf("report on one store: exit %d: %s", code, errOut)
		}
		if format == "text" {
			two = strings.Replace(two, ", 2 stores", ", 1 store", 1)
		} else {
			two = strings.Replace(two, `"stores": 2,`, `"stores": 1,`, 1)
		}
		if two != one {
			t.Errorf("%s report on a.db + b.db differs from the one on ab.db:\n%s\n%s", format, two, one)
		}
	}
	// The merged counts are the sums of what was planned.
	code, out, _ := runCmd(t, runReport, "--store", pa, "--store", pb, "--format", "json")
	var s verdict.Status
	if err := json.Unmarshal([]byte(out), &s); code != 0 || err != nil {
		t.Fatalf("exit %d, %v", code, err)
	}
	var want verdict.Wins
	interleaved := 0
	for _, p := range append(a, b...) {
		if p.fallback == "" {
			interleaved++
		}
		switch p.outcome {
		case merge.ChallengerWin:
			want.Challenger++
		case merge.IncumbentWin:
			want.Incumbent++
		case merge.Tie:
			want.Tie++
		}
	}
	if s.Wins != want || s.Impressions != 3000 || s.Interleaved != int64(interleaved) {
		t.Errorf("merged wins %+v, impressions %d, interleaved %d; want %+v, 3000, %d", s.Wins, s.Impressions, s.Interleaved, want, interleaved)
	}
}

func TestReportGolden(t *testing.T) {
	dir := t.TempDir()
	cases := []struct {
		golden  string
		traffic func(*rand.Rand) []planned
		extra   []string
	}{
		{"report_challenger.txt", func(r *rand.Rand) []planned {
			return plannedTraffic(r, "spring-refresh", 3000, 2000, time.Second, trafficMix{0.30, 0.15, 0.05, 0.1})
		}, nil},
		{"report_undecided.txt", func(r *rand.Rand) []planned {
			return plannedTraffic(r, "spring-refresh", 1200, 40, time.Second, trafficMix{0.2, 0.2, 0.1, 0.1})
		}, []string{"--margin", "0.05"}},
		{"report_challenger.json", func(r *rand.Rand) []planned {
			return plannedTraffic(r, "spring-refresh", 3000, 2000, time.Second, trafficMix{0.30, 0.15, 0.05, 0.1})
		}, []string{"--format", "json"}},
		{"report_challenger.html", func(r *rand.Rand) []planned {
			return plannedTraffic(r, "spring-refresh", 3000, 2000, time.Second, trafficMix{0.30, 0.15, 0.05, 0.1})
		}, []string{"--format", "html", "--margin", "0.02"}},
	}
	for i, c := range cases {
		t.Run(c.golden, func(t *testing.T) {
			path := filepath.Join(dir, fmt.Sprintf("%d.db", i))
			writeStore(t, path, c.traffic(rand.New(rand.NewPCG(uint64(i), 1))))
			code, out, errOut := runCmd(t, runReport, append([]string{"--store", path}, c.extra...)...)
			if code != 0 {
				t.Fatalf("exit %d: %s", code, errOut)
			}
			checkGolden(t, c.golden, []byte(out))
		})
	}
}

func TestReportStoreProblems(t *testing.T) {
	dir := t.TempDir()
	good := filepath.Join(dir, "good.db")
	writeStore(t, good, plannedTraffic(rand.New(rand.NewPCG(1, 1)), "spring-refresh", 50, 10, time.Second, trafficMix{0.3, 0.3, 0.1, 0.1}))
	two := filepath.Join(dir, "two.db")
	writeStore(t, two, append(plannedTraffic(rand.New(rand.NewPCG(2, 1)), "spring-refresh", 20, 5, time.Second, trafficMix{0.3, 0.3, 0.1, 0.1}),
		plannedTraffic(rand.New(rand.NewPCG(3, 1)), "mulch-finder", 20, 5, time.Second, trafficMix{0.3, 0.3, 0.1, 0.1})...))
	foreign := filepath.Join(dir, "notes.db")
	if err := os.WriteFile(foreign, bytes.Repeat([]byte("compost turns every week\n"), 400), 0o600); err != nil {
		t.Fatal(err)
	}
	whole, err := os.ReadFile(good)
	if err != nil {
		t.Fatal(err)
	}
	truncated := filepath.Join(dir, "truncated.db")
	if err := os.WriteFile(truncated, whole[:len(whole)/2], 0o600); err != nil {
		t.Fatal(err)
	}
	locked := filepath.Join(dir, "live.db")
	live, err := store.Open(locked, &store.Options{FinalizeEvery: -1})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = live.Close() })

	cases := []struct {
		name string
		args []string
		want []string
	}{
		{"missing file", []string{"--store", good, "--store", filepath.Join(dir, "gone.db")}, []string{"gone.db: no such store file"}},
		{"foreign file", []string{"--store", foreign}, []string{"notes.db: not a riffle store"}},
		{"locked file", []string{"--store", locked}, []string{"live.db: locked by a running riffle; use a copy", "/api/v1/snapshot"}},
		{"unknown experiment", []string{"--store", good, "--experiment", "seed-swap"}, []string{`"seed-swap" is in none of the stores`, "spring-refresh"}},
		{"several experiments", []string{"--store", two}, []string{"several experiments (mulch-finder, spring-refresh)", "--experiment"}},
		{"same store twice", []string{"--store", good, "--store", good}, []string{"copies of one sidecar's store", "count twice"}},
		{"truncated file", []string{"--store", truncated}, []string{"truncated.db", "damaged or truncated"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			start := time.Now()
			code, out, errOut := runCmd(t, runReport, c.args...)
			if code != 1 || out != "" {
				t.Errorf("exit %d, stdout %q; want exit 1 and nothing on stdout", code, out)
			}
			for _, w := range c.want {
				if !strings.Contains(errOut, w) {
					t.Errorf("stderr %q lacks %q", errOut, w)
				}
			}
			if d := time.Since(start); d > 3*time.Second {
				t.Errorf("took %v; want a quick answer", d)
			}
		})
	}
	if code, _, errOut := runCmd(t, runReport, "--store", two, "--experiment", "mulch-finder"); code != 0 {
		t.Errorf("--experiment mulch-finder: exit %d: %s", code, errOut)
	}
}

func TestReportOpenProblemKeepsCause(t *testing.T) {
	for _, cause := range []error{fs.ErrNotExist, store.ErrLocked, store.ErrNotStore, store.ErrSchema} {
		if err := openProblem("x.db", time.Second, fmt.Errorf("wrapped: %w", cause)); !errors.Is(err, cause) || !strings.HasPrefix(err.Error(), "x.db: ") {
			t.Errorf("openProblem(%v) = %v; want it to name x.db and wrap the cause", cause, err)
		}
	}
}

func TestReportBadFlags(t *testing.T) {
	cases := []struct {
		args []string
		want string
	}{
		{nil, "--store is required"},
		{[]string{"--store", "a.db", "--format", "xml"}, `--format "xml"`},
		{[]string{"--store", "a.db", "--alpha", "0"}, "--alpha 0"},
		{[]string{"--store", "a.db", "--margin", "-0.1"}, "--margin -0.1"},
		{[]string{"--store", "a.db", "--mde", "0.7"}, "--mde 0.7"},
		{[]string{"--store", "a.db", "--timeout", "-1s"}, "--timeout -1s"},
		{[]string{"--store", "a.db", "b.db"}, `unexpected argument "b.db"`},
		{[]string{"--store", ""}, "empty path"},
	}
	for _, c := range cases {
		code, out, errOut := runCmd(t, runReport, c.args...)
		if code != 2 || out != "" || !strings.Contains(errOut, c.want) {
			t.Errorf("riffle report %v: exit %d, stdout %q, stderr %q; want exit 2 and %q", c.args, code, out, errOut, c.want)
		}
	}
}

// TestReportTakesSettingsFromConfig checks that --config supplies the
// experiment's statistical settings (so the report matches the live API),
// and that a flag given on the command line still wins.
func TestReportTakesSettingsFromConfig(t *testing.T) {
	dir := t.TempDir()
	db := filepath.Join(dir, "a.db")
	writeStore(t, db, plannedTraffic(rand.New(rand.NewPCG(4, 1)), "spring-refresh", 200, 50, time.Second, trafficMix{0.3, 0.3, 0.1, 0.1}))
	cfgPath := filepath.Join(dir, "riffle.yaml")
	cfg := `incumbent: {url: "http://127.0.0.1:7001"}
challenger: {url: "http://127.0.0.1:7002"}
routes: [{path: /v1/recommend, list: /items, id: /sku}]
user: {header: Shopper-Id}
experiment: {name: spring-refresh, alpha: 0.01, mde: 0.05, margin: 0.03}
`
	if err := os.WriteFile(cfgPath, []byte(cfg), 0o600); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		args      []string
		alpha, mg float64
	}{
		{[]string{"--config", cfgPath}, 0.01, 0.03},
		{[]string{"--config", cfgPath, "--margin", "0.01"}, 0.01, 0.01},
	} {
		code, out, errOut := runCmd(t, runReport, append([]string{"--store", db, "--format", "json"}, c.args...)...)
		if code != 0 {
			t.Fatalf("%v: exit %d: %s", c.args, code, errOut)
		}
		var st struct{ Alpha, Margin, MDE float64 }
		if err := json.Unmarshal([]byte(out), &st); err != nil {
			t.Fatal(err)
		}
		if st.Alpha != c.alpha || st.Margin != c.mg || st.MDE != 0.05 {
			t.Errorf("%v: alpha %v margin %v mde %v; want %v, %v, 0.05", c.args, st.Alpha, st.Margin, st.MDE, c.alpha, c.mg)
		}
	}
}

// TestReportLockedAtOnce checks the README's promise that a store held by a
// running riffle is reported at once, in one sentence: the old default
// waited 1s for the lock and printed "locked by a running riffle (waited
// 1s); ...: is locked by another riffle". The bound leaves room for the
// store's one 50 ms lock retry (bbolt's flock loop).
func TestReportLockedAtOnce(t *testing.T) {
	path := filepath.Join(t.TempDir(), "live.db")
	live, err := store.Open(path, &store.Options{FinalizeEvery: -1})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = live.Close() })
	for _, c := range []struct {
		run  func(context.Context, []string, io.Writer, io.Writer) int
		name string
	}{{runReport, "report"}, {runExport, "export"}} {
		start := time.Now()
		code, _, errOut := runCmd(t, c.run, "--store", path)
		took := time.Since(start)
		if code != 1 || strings.Count(errOut, "locked") != 1 || strings.Contains(errOut, "waited") {
			t.Errorf("%s: exit %d, stderr %q; want exit 1 saying once that the file is locked", c.name, code, errOut)
		}
		if took >= 900*time.Millisecond {
			t.Errorf("%s: took %v to say the file is locked; want at once (the old default waited 1s)", c.name, took)
		}
	}
}
