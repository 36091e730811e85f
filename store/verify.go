package store

import (
	"errors"
	"fmt"
	"time"

	bolt "go.etcd.io/bbolt"
)

// Verify opens the store file at path read-only and checks it: bbolt's
// page-level consistency check (every page reachable exactly once, keys in
// order), then the store's own invariants: every record decodes, the open
// index names exactly the impressions not yet final, every event belongs
// to a stored impression and names an item it showed, and every
// idempotency key points at a stored event carrying that key. It returns
// all problems found, joined, or nil.
func Verify(path string) error {
	db, err := bolt.Open(path, 0o600, &bolt.Options{ReadOnly: true, Timeout: time.Second})
	if err != nil {
		return openError(path, time.Second, err)
	}
	defer db.Close()
	var problems []error
	err = db.View(func(tx *bolt.Tx) error {
		for err := range tx.Check() {
			problems = append(problems, fmt.Errorf("bbolt: %w", err))
		}
		if len(problems) > 0 || tx.Bucket(bucketMeta) == nil {
			return nil
		}
		return checkInvariants(tx)
	})
	if err != nil {
		problems = append(problems, err)
	}
	if err := errors.Join(problems...); err != nil {
		return fmt.Errorf("store %s: %w", path, err)
	}
	return nil
}

func checkInvariants(tx *bolt.Tx) error {
	open := map[ID]bool{}
	// A parked impression left the open index without becoming final, so
	// for this check it counts as open.
	for _, b := range []*bolt.Bucket{tx.Bucket(bucketOpen), tx.Bucket(bucketParked)} {
		if b == nil {
			continue // a file from before the parked bucket
		}
		err := b.ForEach(func(k, _ []byte) error {
			if len(k) != 8+len(ID{}) {
				return fmt.Errorf("open or parked index key %x: %w", k, ErrCorrupt)
			}
			open[ID(k[8:])] = true
			return nil
		})
		if err != nil {
			return err
		}
	}
	recs := map[ID][]string{} // id -> items shown
	err := tx.Bucket(bucketImp).ForEach(func(k, v []byte) error {
		r, err := decodeRecord(k, v)
		if err != nil {
			return err
		}
		if r.Final == open[r.ID] {
			return fmt.Errorf("impression %s: final %v but in the open index %v: %w", r.ID, r.Final, open[r.ID], ErrCorrupt)
		}
		delete(open, r.ID)
		items := make([]string, len(r.Slots))
		for i, s := range r.Slots {
			items[i] = s.Item
		}
		recs[r.ID] = items
		return nil
	})
	if err != nil {
		return err
	}
	for id := range open {
		return fmt.Errorf("open index names missing impression %s: %w", id, ErrCorrupt)
	}
	return checkEvents(tx, recs)
}

func checkEvents(tx *bolt.Tx, recs map[ID][]string) error {
	events := tx.Bucket(bucketEvents)
	err := events.ForEach(func(k, v []byte) error {
		ev, err := decodeEvent(k, v)
		if err != nil {
			return err
		}
		items, ok := recs[ev.Impression]
		shown := false
		for _, it := range items {
			shown = shown || it == ev.Item
		}
		if !shown {
			return fmt.Errorf("event %x: impression stored %v, item %q not in it: %w", k, ok, ev.Item, ErrCorrupt)
		}
		return nil
	})
	if err != nil {
		return err
	}
	return tx.Bucket(bucketKeys).ForEach(func(k, v []byte) error {
		ev, err := decodeEvent(v, events.Get(v))
		if err != nil || ev.Key != string(k) {
			return fmt.Errorf("key %q names event %x (%v, key %q): %w", k, v, err, ev.Key, ErrCorrupt)
		}
		return nil
	})
}
