package store

import (
	"bytes"
	"encoding/binary"
	"path/filepath"
	"sync"
	"testing"
	"time"

	bolt "go.etcd.io/bbolt"

	"riffle/merge"
)

// t0 is the tests' epoch: an arbitrary fixed instant.
var t0 = time.Date(2026, 3, 14, 9, 0, 0, 0, time.UTC)

// clock is a settable fake clock.
type clock struct {
	mu sync.Mutex
	t  time.Time
}

func newClock(t time.Time) *clock { return &clock{t: t} }

func (c *clock) Now() time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.t
}

func (c *clock) Set(t time.Time) {
	c.mu.Lock()
	c.t = t
	c.mu.Unlock()
}

// testOptions returns options for a test store: the fake clock, no
// background pass (tests call Finalize and Retain), short lock wait.
func testOptions(c *clock) *Options {
	return &Options{Now: c.Now, FinalizeEvery: -1, Timeout: 200 * time.Millisecond}
}

// openTest opens a store in t.TempDir(); on cleanup it closes the store and
// checks the file (see checkFile).
func openTest(t *testing.T, o *Options) (*Store, string) {
	t.Helper()
	path := filepath.Join(t.TempDir(), "riffle.db")
	st, err := Open(path, o)
	if err != nil {
		t.Fatalf("Open(%s): %v", path, err)
	}
	t.Cleanup(func() {
		if err := st.Close(); err != nil {
			t.Errorf("Close: %v", err)
		}
		checkFile(t, path)
	})
	return st, path
}

// checkFile checks the file with Verify.
func checkFile(t *testing.T, path string) {
	t.Helper()
	if err := Verify(path); err != nil {
		t.Errorf("Verify(%s): %v", path, err)
	}
}

// fixedID returns a deterministic id for time t and tag.
func fixedID(t time.Time, tag uint64) ID {
	var id ID
	binary.BigEndian.PutUint64(id[:8], uint64(t.UnixNano()))
	binary.BigEndian.PutUint64(id[8:], tag)
	return id
}

// teamDraftImpression is a 4-slot team-draft impression at time t of the
// incumbent's list A = [a1 a2 a3 b2] and the challenger's B = [b1 b2 a1 a4]
// with the incumbent picking first: a1 (incumbent; ranks 1 in A, 3 in B),
// b1 (challenger; -, 1), a2 (incumbent; 2, -), b2 (challenger; 4, 2).
func teamDraftImpression(t time.Time, tag, user uint64) *Impression {
	id := fixedID(t, tag)
	return &Impression{
		ID: id, Time: t, Experiment: "spring-refresh", User: user,
		Policy: "team-draft", Seed: id.Seed(),
		Slots: []merge.Slot{
			{Item: "a1", Team: merge.Incumbent, RankA: 1, RankB: 3},
			{Item: "b1", Team: merge.Challenger, RankA: 0, RankB: 1},
			{Item: "a2", Team: merge.Incumbent, RankA: 2, RankB: 0},
			{Item: "b2", Team: merge.Challenger, RankA: 4, RankB: 2},
		},
	}
}

// readRecord returns the stored record of id.
func readRecord(t *testing.T, st *Store, id ID) (record, bool) {
	t.Helper()
	var r record
	var ok bool
	err := st.db.View(func(tx *bolt.Tx) error {
		v := tx.Bucket(bucketImp).Get(id[:])
		if v == nil {
			return nil
		}
		ok = true
		var err error
		r, err = decodeRecord(id[:], v)
		return err
	})
	if err != nil {
		t.Fatalf("read %s: %v", id, err)
	}
	return r, ok
}

// countEvents returns how many events are stored for id.
func countEvents(t *testing.T, st *Store, id ID) int {
	t.Helper()
	n := 0
	err := st.db.View(func(tx *bolt.Tx) error {
		c := tx.Bucket(bucketEvents).Cursor()
		for k, _ := c.Seek(id[:]); k != nil && bytes.HasPrefix(k, id[:]); k, _ = c.Next() {
			n++
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	return n
}

// record hands ims to st and flushes them to the file.
func recordAll(t *testing.T, st *Store, ims ...*Impression) {
	t.Helper()
	for _, im := range ims {
		if !st.Record(im) {
			t.Fatalf("Record(%s) = false", im.ID)
		}
	}
	if err := st.Flush(t.Context()); err != nil {
		t.Fatalf("Flush: %v", err)
	}
}
