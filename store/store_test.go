package store

import (
	"bytes"
	"context"
	"encoding/binary"
	"errors"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"

	"riffle/merge"
)

func TestOpenErrors(t *testing.T) {
	dir := t.TempDir()
	garbage := filepath.Join(dir, "garbage.db")
	if err := os.WriteFile(garbage, bytes.Repeat([]byte("not a database "), 1000), 0o600); err != nil {
		t.Fatal(err)
	}
	foreign := filepath.Join(dir, "foreign.db")
	newBolt(t, foreign, func(tx *bolt.Tx) error { _, err := tx.CreateBucket([]byte("someone-else")); return err })
	future := filepath.Join(dir, "future.db")
	newBolt(t, future, func(tx *bolt.Tx) error {
		b, err := tx.CreateBucket(bucketMeta)
		if err != nil {
			return err
		}
		return b.Put(keySchema, binary.AppendUvarint(nil, schemaVersion+1))
	})
	empty := filepath.Join(dir, "empty.db")
	newBolt(t, empty, func(*bolt.Tx) error { return nil })

	tests := []struct {
		name     string
		path     string
		readOnly bool
		want     error
	}{
		{"not a bbolt file", garbage, false, ErrNotStore},
		{"bbolt file of another program", foreign, false, ErrNotStore},
		{"newer schema", future, false, ErrSchema},
		{"newer schema read-only", future, true, ErrSchema},
		{"empty bbolt file read-only", empty, true, ErrNotStore},
		{"missing file read-only", filepath.Join(dir, "missing.db"), true, os.ErrNotExist},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			st, err := Open(tc.path, &Options{ReadOnly: tc.readOnly, Timeout: 100 * time.Millisecond})
			if err == nil {
				st.Close()
				t.Fatalf("Open(%s) = nil error, want %v", tc.path, tc.want)
			}
			if !errors.Is(err, tc.want) {
				t.Errorf("Open(%s) = %v, want errors.Is %v", tc.path, err, tc.want)
			}
			if !strings.Contains(err.Error(), tc.path) {
				t.Errorf("error %q does not name the file %s", err, tc.path)
			}
		})
	}
}

// newBolt creates a bbolt file at path and runs fn in one update.
func newBolt(t *testing.T, path string, fn func(*bolt.Tx) error) {
	t.Helper()
	db, err := bolt.Open(path, 0o600, nil)
	if err != nil {
		t.Fatal(err)
	}
	if err := db.Update(fn); err != nil {
		t.Fatal(err)
	}
	if err := db.Close(); err != nil {
		t.Fatal(err)
	}
}

func TestOpenLocked(t *testing.T) {
	st, path := openTest(t, testOptions(newClock(t0)))
	_ = st
	for _, readOnly := range []bool{false, true} {
		start := time.Now()
		second, err := Open(path, &Options{ReadOnly: readOnly, Timeout: 150 * time.Millisecond})
		if err == nil {
			second.Close()
			t.Fatalf("second Open(readOnly=%v) succeeded while the file is open for writing", readOnly)
		}
		if !errors.Is(err, ErrLocked) {
			t.Errorf("second Open(readOnly=%v) = %v, want ErrLocked", readOnly, err)
		}
		if want := "store " + path + " is locked by another riffle"; !strings.Contains(err.Error(), want) {
			t.Errorf("error %q does not say %q", err, want)
		}
		if waited := time.Since(start); waited > 2*time.Second {
			t.Errorf("second Open took %v, want about the 150ms timeout", waited)
		}
	}
}

func TestRoundTrip(t *testing.T) {
	c := newClock(t0)
	st, path := openTest(t, testOptions(c))
	td := teamDraftImpression(t0, 1, HashUser("shopper-7"))
	prob := &Impression{
		ID: fixedID(t0.Add(time.Second), 2), Time: t0.Add(time.Second + 3*time.Microsecond),
		Experiment: "spring-refresh", Policy: "probabilistic", Seed: 42,
		Slots: []merge.Slot{
			{Item: "rake", Team: merge.Challenger, RankA: 3, RankB: 1, PA: 0.125, PB: 0.5},
			{Item: "hoe", Team: merge.Fixed, RankA: 1, RankB: 0},
		},
	}
	fallback := &Impression{
		ID: fixedID(t0.Add(2*time.Second), 3), Time: t0.Add(2 * time.Second), Experiment: "spring-refresh",
		Fallback: "challenger-timeout", Seed: fixedID(t0.Add(2*time.Second), 3).Seed(),
		Slots: []merge.Slot{{Item: "trowel", Team: merge.Incumbent, RankA: 1}},
	}
	recordAll(t, st, td, prob, fallback)
	check := func(st *Store, when string) {
		for _, want := range []*Impression{td, prob, fallback} {
			got, ok := readRecord(t, st, want.ID)
			if !ok {
				t.Fatalf("%s: impression %s not stored", when, want.ID)
			}
			if !got.Time.Equal(want.Time) {
				t.Errorf("%s: %s time = %v, want %v", when, want.ID, got.Time, want.Time)
			}
			got.Time = want.Time
			if !reflect.DeepEqual(got.Impression, *want) || got.Final {
				t.Errorf("%s: stored\n%+v\nwant\n%+v (open)", when, got, *want)
			}
		}
	}
	check(st, "before restart")
	if err := st.Close(); err != nil {
		t.Fatal(err)
	}
	ro, err := Open(path, &Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer ro.Close()
	check(ro, "after reopen")
	if ro.Record(td) {
		t.Error("Record on a read-only store = true, want false")
	}
	if errs := ro.AddEvents(t.Context(), []Event{{Impression: td.ID, Item: "a1", Type: "click"}}); !errors.Is(errs[0], ErrReadOnly) {
		t.Errorf("AddEvents on a read-only store = %v, want ErrReadOnly", errs[0])
	}
}

func TestImpressionSize(t *testing.T) {
	im := &Impression{ID: NewID(t0), Time: t0, Experiment: "spring-refresh", User: HashUser("u"), Policy: "team-draft"}
	im.Seed = im.ID.Seed()
	for i := range 10 {
		im.Slots = append(im.Slots, merge.Slot{Item: "sku-1000" + string(rune('0'+i)), Team: merge.Team(i % 2), RankA: int32(i/2 + 1), RankB: int32(i/2 + 1)})
	}
	// Worked out from the layout in codec.go: flags 1 + time delta 1 +
	// experiment 1+14 + user 8 + policy 1+10 + fallback 1 + slot count 1
	// = 38, and per slot item 1+9 + team 1 + two ranks 1+1 = 13, so
	// 38 + 10*13 = 168 bytes (plus the 16-byte key).
	if got, want := len(encodeRecord(nil, &record{Impression: *im})), 168; got != want {
		t.Errorf("10-slot impression encodes to %d bytes, want %d", got, want)
	}
}

func TestQueueFullDrops(t *testing.T) {
	o := testOptions(newClock(t0))
	o.QueueSize, o.Batch = 2, 1
	st, _ := openTest(t, o)
	// Hold bbolt's writer lock so the store's writer blocks in its first
	// commit; the queue then fills up behind it.
	held, release := make(chan struct{}), make(chan struct{})
	go st.db.Update(func(*bolt.Tx) error { close(held); <-release; return nil })
	<-held
	if !st.Record(teamDraftImpression(t0, 1, 0)) {
		t.Fatal("first Record = false")
	}
	waitFor(t, "the writer to take the first impression", func() bool { return len(st.queue) == 0 })
	// Record must not block on a full queue. While the writer is held it
	// cannot drain, so a blocking Record would never return: the deadline
	// only turns that hang into a failure, with generous slack.
	got := []bool{}
	done := make(chan struct{})
	go func() {
		defer close(done)
		for i := range 4 {
			got = append(got, st.Record(teamDraftImpression(t0, uint64(i+2), 0)))
		}
	}()
	select {
	case <-done:
	case <-time.After(5 * time.Second):
		close(release)
		<-done
		t.Fatal("Record on a full queue blocked until the writer was released; it must not block")
	}
	close(release)
	if want := []bool{true, true, false, false}; !reflect.DeepEqual(got, want) {
		t.Errorf("Record results with queue size 2 = %v, want %v", got, want)
	}
	if err := st.Flush(t.Context()); err != nil {
		t.Fatal(err)
	}
	for i, want := range []struct {
		c    float64
		name string
	}{{3, "queued"}, {3, "committed"}, {2, "dropped"}} {
		_ = i
		if got := counterValue(t, st, want.name); got != want.c {
			t.Errorf("impressions %s = %v, want %v", want.name, got, want.c)
		}
	}
}

func TestCloseDrainsQueue(t *testing.T) {
	o := testOptions(newClock(t0))
	o.Interval, o.Batch = time.Hour, 1<<20 // nothing commits before Close
	path := filepath.Join(t.TempDir(), "riffle.db")
	st, err := Open(path, o)
	if err != nil {
		t.Fatal(err)
	}
	const n = 500
	for i := range n {
		if !st.Record(teamDraftImpression(t0.Add(time.Duration(i)), uint64(i), 0)) {
			t.Fatalf("Record %d = false", i)
		}
	}
	if err := st.Close(); err != nil {
		t.Fatal(err)
	}
	if st.Record(teamDraftImpression(t0, 9999, 0)) {
		t.Error("Record after Close = true")
	}
	checkFile(t, path)
	ro, err := Open(path, &Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer ro.Close()
	a, err := ro.Aggregate(context.Background(), "spring-refresh")
	if err != nil {
		t.Fatal(err)
	}
	if a.Impressions != n {
		t.Errorf("after Close, %d impressions stored, want %d", a.Impressions, n)
	}
}

func TestSnapshotOpens(t *testing.T) {
	st, _ := openTest(t, testOptions(newClock(t0)))
	recordAll(t, st, teamDraftImpression(t0, 1, 5), teamDraftImpression(t0.Add(time.Minute), 2, 6))
	snap := filepath.Join(t.TempDir(), "snap.db")
	f, err := os.Create(snap)
	if err != nil {
		t.Fatal(err)
	}
	n, err := st.Snapshot(f)
	if cerr := f.Close(); err != nil || cerr != nil {
		t.Fatalf("Snapshot: %v, close: %v", err, cerr)
	}
	if fi, _ := os.Stat(snap); fi.Size() != n {
		t.Errorf("Snapshot returned %d bytes, file has %d", n, fi.Size())
	}
	checkFile(t, snap)
	cp, err := Open(snap, &Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer cp.Close()
	got, err := cp.Aggregate(context.Background(), "spring-refresh")
	if err != nil {
		t.Fatal(err)
	}
	want, _ := st.Aggregate(context.Background(), "spring-refresh")
	if !reflect.DeepEqual(got, want) {
		t.Errorf("snapshot aggregate %+v, live %+v", got, want)
	}
}

func TestOptionsRejectNegative(t *testing.T) {
	dir := t.TempDir()
	for _, o := range []*Options{
		{Retention: -time.Hour},
		{Rules: Rules{Window: -time.Minute}},
		{Rules: Rules{Eta: -1}},
		{Rules: Rules{Events: map[string]float64{"click": -1}}},
	} {
		if st, err := Open(filepath.Join(dir, "x.db"), o); err == nil {
			st.Close()
			t.Errorf("Open with %+v succeeded, want an error", o)
		}
	}
}

func TestVerifyFindsProblems(t *testing.T) {
	tests := []struct {
		name  string
		spoil func(tx *bolt.Tx, id ID) error
	}{
		{"open impression missing from the open index", func(tx *bolt.Tx, id ID) error {
			return tx.Bucket(bucketOpen).Delete(openKey(t0, id))
		}},
		{"event for an item not shown", func(tx *bolt.Tx, id ID) error {
			k := binary.BigEndian.AppendUint64(append([]byte{}, id[:]...), 77)
			return tx.Bucket(bucketEvents).Put(k, encodeEvent(nil, &Event{Impression: id, Item: "hose", Type: "click", Time: t0}))
		}},
		{"key naming no event", func(tx *bolt.Tx, id ID) error {
			return tx.Bucket(bucketKeys).Put([]byte("k"), append(id[:], 0, 0, 0, 0, 0, 0, 0, 1))
		}},
		{"undecodable record", func(tx *bolt.Tx, id ID) error {
			return tx.Bucket(bucketImp).Put(id[:], []byte{0, 0x80})
		}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "riffle.db")
			st, err := Open(path, testOptions(newClock(t0)))
			if err != nil {
				t.Fatal(err)
			}
			im := teamDraftImpression(t0, 1, 0)
			recordAll(t, st, im)
			st.Close()
			if err := Verify(path); err != nil {
				t.Fatalf("Verify of a good file: %v", err)
			}
			db, err := bolt.Open(path, 0o600, nil)
			if err != nil {
				t.Fatal(err)
			}
			if err := db.Update(func(tx *bolt.Tx) error { return tc.spoil(tx, im.ID) }); err != nil {
				t.Fatal(err)
			}
			db.Close()
			if err := Verify(path); !errors.Is(err, ErrCorrupt) {
				t.Errorf("Verify after breaking the file = %v, want ErrCorrupt", err)
			}
		})
	}
}

func TestAggregateOfUnseenExperiment(t *testing.T) {
	st, _ := openTest(t, testOptions(newClock(t0)))
	a, err := st.Aggregate(context.Background(), "autumn-bulbs")
	if err != nil || a.Experiment != "autumn-bulbs" || !a.Start.IsZero() || a.Impressions != 0 || a.Users == nil {
		t.Errorf("Aggregate of an unseen experiment = %+v, %v; want zero counts, zero start, no error", a, err)
	}
}
