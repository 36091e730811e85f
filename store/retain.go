package store

import (
	"bytes"
	"context"
	"fmt"
	"time"

	bolt "go.etcd.io/bbolt"
)

// Retain deletes final impressions served more than Options.Retention
// before now (by their id's time), with their events and idempotency
// keys; aggregates stay. Freed pages
// are reused by later commits, so under steady traffic the file stops
// growing. Open impressions are left for Finalize. It returns how many
// impressions it deleted; with zero Retention it deletes none.
func (s *Store) Retain(ctx context.Context, now time.Time) (int, error) {
	if s.opt.ReadOnly {
		return 0, s.unwritable()
	}
	if s.opt.Retention <= 0 {
		return 0, nil
	}
	limit := make([]byte, 8)
	putNanos(limit, now.Add(-s.opt.Retention))
	var old bool
	_ = s.db.View(func(tx *bolt.Tx) error {
		k, _ := tx.Bucket(bucketImp).Cursor().First()
		old = k != nil && bytes.Compare(k[:min(8, len(k))], limit) < 0
		return nil
	})
	if !old {
		return 0, nil // no write transaction when nothing is old enough
	}
	var from []byte
	total := 0
	for {
		if err := ctx.Err(); err != nil {
			return total, fmt.Errorf("store %s: retention: %w", s.path, err)
		}
		var n int
		err := s.db.Update(func(tx *bolt.Tx) error {
			var err error
			n, from, err = retainChunk(tx, from, limit)
			return err
		})
		if err != nil {
			return total, fmt.Errorf("store %s: retention: %w", s.path, err)
		}
		total += n
		if from == nil {
			return total, nil
		}
	}
}

// retainChunk deletes up to chunk final impressions older than limit,
// scanning from key from (nil: the first). It returns the key to resume
// at, or nil when the scan is done.
func retainChunk(tx *bolt.Tx, from, limit []byte) (int, []byte, error) {
	imp := tx.Bucket(bucketImp)
	var old [][]byte
	var next []byte
	c := imp.Cursor()
	k, v := c.First()
	if from != nil {
		k, v = c.Seek(from)
	}
	for ; k != nil; k, v = c.Next() {
		if bytes.Compare(k[:min(8, len(k))], limit) >= 0 {
			break
		}
		if len(old) == chunk {
			next = bytes.Clone(k)
			break
		}
		if len(v) > 0 && v[0]&flagFinal != 0 {
			old = append(old, bytes.Clone(k))
		}
	}
	for _, k := range old {
		if err := deleteImpression(tx, k); err != nil {
			return 0, nil, err
		}
	}
	return len(old), next, nil
}

// deleteImpression deletes one impression record, its events and keys.
func deleteImpression(tx *bolt.Tx, k []byte) error {
	var id ID
	copy(id[:], k)
	var evKeys [][]byte
	keys := tx.Bucket(bucketKeys)
	err := eachEvent(tx, id, func(ek []byte, ev Event) error {
		evKeys = append(evKeys, bytes.Clone(ek))
		if ev.Key != "" {
			return keys.Delete([]byte(ev.Key))
		}
		return nil
	})
	if err != nil {
		return fmt.Errorf("delete events of %s: %w", id, err)
	}
	evb := tx.Bucket(bucketEvents)
	for _, ek := range evKeys {
		if err := evb.Delete(ek); err != nil {
			return fmt.Errorf("delete event of %s: %w", id, err)
		}
	}
	if err := tx.Bucket(bucketImp).Delete(k); err != nil {
		return fmt.Errorf("delete impression %s: %w", id, err)
	}
	return nil
}
