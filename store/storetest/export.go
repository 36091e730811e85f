package storetest

import (
	"bytes"
	"encoding/json"
	"slices"
	"testing"
	"time"

	"riffle/store"
)

// testRetention checks that retention deletes final impressions older than
// its limit, with their events, never one still inside its attribution
// window (even when the retention is shorter than the window), and that
// the aggregates stay.
func testRetention(t *testing.T, open Opener) {
	f := newFixture(t, open, store.Rules{}, 10*time.Minute)
	old, young := TeamDraft(T0, 1, 7), TeamDraft(T0.Add(20*time.Minute), 2, 8)
	f.record(old, young)
	retain := func(now time.Duration, want int) {
		t.Helper()
		f.clk.Set(T0.Add(now))
		if n, err := f.st.Retain(t.Context(), T0.Add(now)); n != want || err != nil {
			t.Fatalf("Retain at +%v = %d, %v; want %d, nil", now, n, err, want)
		}
	}
	retain(25*time.Minute, 0) // old is past the retention but still open
	f.mustAdd(store.Event{Impression: old.ID, Item: "b1", Type: "click", Time: T0.Add(25 * time.Minute), Key: "late-click"})
	f.finalize(T0.Add(30*time.Minute), 1)
	retain(30*time.Minute, 1) // old is final and past the retention; young is open
	if err := f.add(store.Event{Impression: young.ID, Item: "a1", Type: "click", Time: T0.Add(30 * time.Minute)}); err != nil {
		t.Errorf("event on the impression inside its window after retention: %v", err)
	}
	if got, want := f.aggregate().Outcomes, outcomes(0, 0, 1, 0); got != want {
		t.Errorf("outcomes after retention %v, want %v (aggregates stay)", got, want)
	}
	lines := export(t, f.st, time.Time{})
	if len(lines) != 1 || lines[0].Impression != young.ID.String() {
		t.Errorf("export after retention: %+v, want only %s", lines, young.ID)
	}
}

// exported is one line of Export's NDJSON, read independently of the
// store's own types.
type exported struct {
	Impression string `json:"impression"`
	Time       string `json:"time"`
	Experiment string `json:"experiment"`
	User       string `json:"user"`
	Policy     string `json:"policy"`
	Seed       string `json:"seed"`
	Fallback   string `json:"fallback"`
	Slots      []struct {
		Item, Team string
	} `json:"slots"`
	Events []struct {
		Item, Event, Key string
		Slot             int
	} `json:"events"`
	Outcome string `json:"outcome"`
	Score   *struct {
		Incumbent, Challenger float64
	} `json:"score"`
}

// export reads the store's export from since.
func export(t *testing.T, st store.Reader, since time.Time) []exported {
	t.Helper()
	var buf bytes.Buffer
	if err := st.Export(t.Context(), &buf, since); err != nil {
		t.Fatalf("Export: %v", err)
	}
	var lines []exported
	dec := json.NewDecoder(&buf)
	for dec.More() {
		var l exported
		if err := dec.Decode(&l); err != nil {
			t.Fatalf("Export line %d: %v", len(lines)+1, err)
		}
		lines = append(lines, l)
	}
	return lines
}

// testExport checks Export's lines: order, slots, events with their
// 1-based slots and keys, outcome and score, and the since filter.
func testExport(t *testing.T, open Opener) {
	f := newFixture(t, open, store.Rules{}, 0)
	won, ramp, open3 := TeamDraft(T0, 1, 0xabc), TeamDraft(T0.Add(time.Minute), 2, 0), TeamDraft(T0.Add(10*time.Minute), 3, 5)
	ramp.Policy, ramp.Fallback = "", "ramp"
	f.record(open3, ramp, won) // out of order: export sorts by time
	f.mustAdd(store.Event{Impression: won.ID, Item: "b1", Type: "click", Time: T0.Add(time.Second), Key: "k-1"})
	f.mustAdd(store.Event{Impression: won.ID, Item: "a1", Type: "purchase", Time: T0.Add(2 * time.Second)})
	f.finalize(T0.Add(31*time.Minute), 2)
	lines := export(t, f.st, time.Time{})
	var ids []string
	for _, l := range lines {
		ids = append(ids, l.Impression)
	}
	if want := []string{won.ID.String(), ramp.ID.String(), open3.ID.String()}; !slices.Equal(ids, want) {
		t.Fatalf("export order %v, want %v", ids, want)
	}
	w := lines[0]
	if w.Outcome != "incumbent" || w.Score == nil || w.Score.Incumbent != 3 || w.Score.Challenger != 1 ||
		w.User != "0000000000000abc" || w.Policy != "team-draft" || w.Experiment != Experiment || len(w.Slots) != 4 ||
		w.Slots[1].Item != "b1" || w.Slots[1].Team != "challenger" || w.Time != T0.Format(time.RFC3339Nano) {
		t.Errorf("finalised line %+v", w)
	}
	if len(w.Events) != 2 || w.Events[0].Item != "b1" || w.Events[0].Slot != 2 || w.Events[0].Key != "k-1" ||
		w.Events[1].Event != "purchase" || w.Events[1].Slot != 1 {
		t.Errorf("events %+v, want the click on b1 (slot 2, key k-1) then the purchase of a1 (slot 1)", w.Events)
	}
	if r := lines[1]; r.Outcome != "none" || r.Fallback != "ramp" || r.Score != nil || r.User != "" {
		t.Errorf("incumbent-only line %+v, want outcome none, fallback ramp, no score or user", r)
	}
	if o := lines[2]; o.Outcome != "open" || o.Score != nil {
		t.Errorf("open line %+v, want outcome open, no score", o)
	}
	if got := export(t, f.st, T0.Add(time.Minute)); len(got) != 2 || got[0].Impression != ramp.ID.String() {
		t.Errorf("export since +1m: %d lines, want the last 2", len(got))
	}
}

// testUnseen checks the reads of a store that has not seen the experiment.
func testUnseen(t *testing.T, open Opener) {
	f := newFixture(t, open, store.Rules{}, 0)
	a := f.aggregate()
	if a.Impressions != 0 || a.Outcomes != [4]int64{} || !a.Start.IsZero() {
		t.Errorf("unseen experiment: %+v, want zero counts and start", a)
	}
	if names, err := f.st.Experiments(t.Context()); err != nil || len(names) != 0 {
		t.Errorf("Experiments of an empty store = %v, %v", names, err)
	}
	f.record(TeamDraft(T0, 1, 1))
	if names, err := f.st.Experiments(t.Context()); err != nil || !slices.Equal(names, []string{Experiment}) {
		t.Errorf("Experiments = %v, %v; want [%s]", names, err, Experiment)
	}
	if id, err := f.st.Instance(); err != nil || id == "" {
		t.Errorf("Instance = %q, %v; want an id", id, err)
	}
}
