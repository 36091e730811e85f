package store

import (
	"context"
	"encoding/binary"
	"fmt"
	"io"
	"time"

	bolt "go.etcd.io/bbolt"
)

// Experiments returns the names of every experiment in the store, sorted.
func (s *Store) Experiments(ctx context.Context) ([]string, error) {
	if err := ctx.Err(); err != nil {
		return nil, fmt.Errorf("store %s: list experiments: %w", s.path, err)
	}
	var names []string
	err := s.view(func(tx *bolt.Tx) error {
		return tx.Bucket(bucketExp).ForEachBucket(func(name []byte) error {
			names = append(names, string(name))
			return nil
		})
	})
	if err != nil {
		return nil, fmt.Errorf("store %s: list experiments: %w", s.path, err)
	}
	return names, nil
}

// Aggregate returns the experiment's counts. Users holds only impressions
// that had a user key; impressions without one (hashed user 0) count in
// Outcomes alone. The recent counts are kept per minute, so the recent
// window is the 60 whole minutes up to RecentEnd's minute. An experiment
// the store has not seen yet gives an Aggregate of zero counts with a zero
// Start, and no error, so a new sidecar can report before its first
// impression.
func (s *Store) Aggregate(ctx context.Context, experiment string) (Aggregate, error) {
	if err := ctx.Err(); err != nil {
		return Aggregate{}, fmt.Errorf("store %s: aggregate: %w", s.path, err)
	}
	a := Aggregate{Experiment: experiment, Users: map[uint64][4]int64{}}
	err := s.view(func(tx *bolt.Tx) error {
		b, _, _ := expBucket(tx, experiment, false)
		if b == nil {
			return nil
		}
		t, err := decodeTotals(experiment, b.Get(keyTotals))
		if err != nil {
			return err
		}
		a.Policy, a.Impressions, a.Interleaved, a.Outcomes = t.Policy, t.Impressions, t.Interleaved, t.Outcomes
		a.Start, a.RecentEnd = time.Unix(0, t.Start).UTC(), time.Unix(0, t.Last).UTC()
		a.RecentSpan = min(recentSpan, a.RecentEnd.Sub(a.Start))
		if a.Users, err = readUsers(b.Bucket(bucketUsers)); err != nil {
			return err
		}
		a.RecentImpressions, a.RecentWithFeedback, err = readRecent(b.Bucket(bucketMinutes), t.Last)
		return err
	})
	if err != nil {
		return Aggregate{}, fmt.Errorf("store %s: aggregate: %w", s.path, err)
	}
	return a, nil
}

func readUsers(b *bolt.Bucket) (map[uint64][4]int64, error) {
	users := make(map[uint64][4]int64, b.Stats().KeyN)
	err := b.ForEach(func(k, v []byte) error {
		c, err := decodeUser(v)
		if err != nil || len(k) != 8 {
			return fmt.Errorf("user counts %x: %w", k, ErrCorrupt)
		}
		users[binary.BigEndian.Uint64(k)] = c
		return nil
	})
	return users, err
}

// readRecent sums the per-minute counts of the hour ending at last.
func readRecent(b *bolt.Bucket, last int64) (interleaved, withFeedback int64, err error) {
	from := minuteOf(last-int64(recentSpan)) + 1
	c := b.Cursor()
	for k, v := c.Seek(binary.BigEndian.AppendUint64(nil, uint64(from))); k != nil; k, v = c.Next() {
		d := decoder{b: v}
		interleaved += int64(d.uvarint("minute"))
		withFeedback += int64(d.uvarint("minute"))
		if d.err != nil {
			return 0, 0, fmt.Errorf("minute counts %x: %w", k, d.err)
		}
	}
	return interleaved, withFeedback, nil
}

// Snapshot writes a consistent copy of the whole file to w (a bbolt file
// that Open reads) while the store keeps serving, and returns its size.
func (s *Store) Snapshot(w io.Writer) (int64, error) {
	var n int64
	err := s.view(func(tx *bolt.Tx) error {
		var err error
		n, err = tx.WriteTo(w)
		return err
	})
	if err != nil {
		return n, fmt.Errorf("store %s: snapshot: %w", s.path, err)
	}
	return n, nil
}
