package store

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/testutil"
	bolt "go.etcd.io/bbolt"
)

// TestRestartKeepsEventsAndCounts closes and reopens the store between
// accepting events, finalising and finalising again: every acknowledged
// event survives, and no outcome is counted twice.
func TestRestartKeepsEventsAndCounts(t *testing.T) {
	path := filepath.Join(t.TempDir(), "riffle.db")
	c := newClock(t0)
	open := func() (*Store, *prometheus.Registry) {
		reg := prometheus.NewRegistry()
		o := testOptions(c)
		o.Registerer = reg
		st, err := Open(path, o)
		if err != nil {
			t.Fatal(err)
		}
		return st, reg
	}
	st, _ := open()
	ims := []*Impression{teamDraftImpression(t0, 1, 1), teamDraftImpression(t0, 2, 2), teamDraftImpression(t0, 3, 3)}
	recordAll(t, st, ims...)
	mustAdd(t, st,
		Event{Impression: ims[0].ID, Item: "b1", Type: "click", Time: t0.Add(time.Minute)},
		Event{Impression: ims[1].ID, Item: "a1", Type: "purchase", Time: t0.Add(time.Minute), Key: "order-1"})
	if err := st.Close(); err != nil {
		t.Fatal(err)
	}

	st, _ = open()
	if countEvents(t, st, ims[0].ID) != 1 || countEvents(t, st, ims[1].ID) != 1 {
		t.Fatal("acknowledged events missing after restart")
	}
	if n, err := st.Finalize(context.Background(), t0.Add(time.Hour)); n != 3 || err != nil {
		t.Fatalf("Finalize = %d, %v; want 3", n, err)
	}
	want := [4]int64{1, 1, 1, 0}
	if err := st.Close(); err != nil {
		t.Fatal(err)
	}

	st, reg := open()
	defer func() { st.Close(); checkFile(t, path) }()
	if n, err := st.Finalize(context.Background(), t0.Add(2*time.Hour)); n != 0 || err != nil {
		t.Errorf("second Finalize after restart = %d, %v; want 0", n, err)
	}
	agg, err := st.Aggregate(context.Background(), "spring-refresh")
	if err != nil {
		t.Fatal(err)
	}
	if agg.Outcomes != want || agg.Impressions != 3 {
		t.Errorf("after restarts: outcomes %v, impressions %d; want %v, 3", agg.Outcomes, agg.Impressions, want)
	}
	// The outcome counter of a fresh process starts at the stored totals.
	expected := `
# HELP riffle_impression_outcomes_total Finalised interleaved impressions by outcome, starting from the totals stored in this sidecar's file.
# TYPE riffle_impression_outcomes_total counter
riffle_impression_outcomes_total{experiment="spring-refresh",outcome="challenger"} 1
riffle_impression_outcomes_total{experiment="spring-refresh",outcome="incumbent"} 1
riffle_impression_outcomes_total{experiment="spring-refresh",outcome="none"} 1
riffle_impression_outcomes_total{experiment="spring-refresh",outcome="tie"} 0
`
	if err := testutil.GatherAndCompare(reg, strings.NewReader(expected), "riffle_impression_outcomes_total"); err != nil {
		t.Error(err)
	}
}

// TestRetentionBoundsFile serves the same traffic for many simulated
// hours with a 2h retention: old records go, aggregates stay, and the file
// stops growing once bbolt reuses the freed pages.
func TestRetentionBoundsFile(t *testing.T) {
	c := newClock(t0)
	o := testOptions(c)
	o.Retention = 2 * time.Hour
	st, path := openTest(t, o)
	var sizes []int64
	const perHour = 400
	tag := uint64(0)
	for hour := range 12 {
		start := t0.Add(time.Duration(hour) * time.Hour)
		var ims []*Impression
		for i := range perHour {
			tag++
			ims = append(ims, teamDraftImpression(start.Add(time.Duration(i)*time.Second), tag, tag%50+1))
		}
		recordAll(t, st, ims...)
		var evs []Event
		for i, im := range ims {
			evs = append(evs, Event{Impression: im.ID, Item: "b1", Type: "click", Time: im.Time.Add(time.Second), Key: "k" + im.ID.String()})
			if i%4 == 0 {
				evs = append(evs, Event{Impression: im.ID, Item: "a1", Type: "purchase", Time: im.Time.Add(2 * time.Second)})
			}
		}
		mustAdd(t, st, evs...)
		now := start.Add(time.Hour)
		c.Set(now)
		if _, err := st.Finalize(context.Background(), now); err != nil {
			t.Fatal(err)
		}
		if _, err := st.Retain(context.Background(), now); err != nil {
			t.Fatal(err)
		}
		fi, err := os.Stat(path)
		if err != nil {
			t.Fatal(err)
		}
		sizes = append(sizes, fi.Size())
	}
	agg, err := st.Aggregate(context.Background(), "spring-refresh")
	if err != nil {
		t.Fatal(err)
	}
	if want := int64(12 * perHour); agg.Impressions != want || agg.Outcomes[1]+agg.Outcomes[2]+agg.Outcomes[3] != want {
		t.Errorf("aggregates after retention: %d impressions, outcomes %v; want %d each finalised", agg.Impressions, agg.Outcomes, want)
	}
	// Impressions older than 2h before the last pass are gone, with their
	// events and keys: a replay of an old keyed event finds nothing.
	var kept int
	_ = st.db.View(func(tx *bolt.Tx) error { kept = tx.Bucket(bucketImp).Stats().KeyN; return nil })
	if kept > 3*perHour {
		t.Errorf("%d impressions kept, want at most %d (2h retention)", kept, 3*perHour)
	}
	oldest := teamDraftImpression(t0, 1, 2)
	err = st.AddEvents(t.Context(), []Event{{Impression: oldest.ID, Item: "b1", Type: "click", Time: t0.Add(time.Second), Key: "k" + oldest.ID.String()}})[0]
	if err == nil || !strings.Contains(err.Error(), "unknown impression") {
		t.Errorf("replay on a deleted impression = %v, want unknown impression", err)
	}
	// Common practice: a file that reuses its pages settles; allow 25%
	// slack for bbolt's freelist and growth steps.
	if last, mid := sizes[len(sizes)-1], sizes[5]; float64(last) > 1.25*float64(mid) {
		t.Errorf("file grew from %d bytes (hour 6) to %d (hour 12) under steady traffic; sizes %v", mid, last, sizes)
	}
	t.Logf("file sizes by hour: %v", sizes)
}
