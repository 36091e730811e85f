package store

import (
	"testing"
	"time"
)

// TestRetainKeepsOpenImpressions: retention deletes final impressions only
// (the contract on Retain and Options.Retention). With a retention of 10m
// and the default 30m window, an impression served at t0 is past retention
// at t0+20m but still open, so it and its event must stay until Finalize
// has counted them; one served at t0-1h and finalised goes in the same pass.
func TestRetainKeepsOpenImpressions(t *testing.T) {
	c := newClock(t0.Add(-time.Hour))
	o := testOptions(c)
	o.Retention = 10 * time.Minute
	st, _ := openTest(t, o)
	old, open := teamDraftImpression(t0.Add(-time.Hour), 1, 7), teamDraftImpression(t0, 2, 7)
	recordAll(t, st, old)
	if n, err := st.Finalize(t0.Add(-30 * time.Minute)); n != 1 || err != nil {
		t.Fatalf("Finalize(old) = %d, %v; want 1, nil", n, err)
	}
	c.Set(t0)
	recordAll(t, st, open)
	mustAdd(t, st, Event{Impression: open.ID, Item: "b1", Type: "click", Time: t0.Add(time.Minute), Key: "order-3"})

	n, err := st.Retain(t0.Add(20 * time.Minute))
	if err != nil || n != 1 {
		t.Fatalf("Retain(t0+20m) = %d, %v; want 1 (the final one), nil", n, err)
	}
	if _, ok := readRecord(t, st, old.ID); ok {
		t.Error("the final impression past retention was kept")
	}
	if r, ok := readRecord(t, st, open.ID); !ok || r.Final {
		t.Fatalf("the open impression past retention: stored %v, final %v; want stored and open", ok, r.Final)
	}
	if got := countEvents(t, st, open.ID); got != 1 {
		t.Errorf("the open impression's events: %d stored, want 1", got)
	}
	// Its window closes at t0+30m: counted, then removed by a later pass.
	if n, err := st.Finalize(t0.Add(30 * time.Minute)); n != 1 || err != nil {
		t.Fatalf("Finalize(t0+30m) = %d, %v; want 1, nil", n, err)
	}
	agg, err := st.Aggregate("spring-refresh")
	if err != nil {
		t.Fatal(err)
	}
	// old: no feedback; open: the challenger's b1 clicked (team-draft,
	// Radlinski, Kurup & Joachims 2008): one challenger win.
	if want := [4]int64{1, 0, 1, 0}; agg.Outcomes != want {
		t.Errorf("outcomes %v, want %v", agg.Outcomes, want)
	}
	if n, err := st.Retain(t0.Add(40 * time.Minute)); n != 1 || err != nil {
		t.Fatalf("Retain(t0+40m) = %d, %v; want 1, nil", n, err)
	}
	if _, ok := readRecord(t, st, open.ID); ok {
		t.Error("the impression was kept after it was final and past retention")
	}
}
