package store

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"time"

	bolt "go.etcd.io/bbolt"

	"riffle/merge"
)

// chunk bounds the records one finalise or retention transaction touches,
// so that no transaction grows without bound and the writer is not held
// up for long.
const chunk = 512

// defaultPolicy resolves a stored policy name with the policies' defaults.
func defaultPolicy(name string) (merge.Policy, error) { return merge.New(name, merge.Options{}) }

// Finalize finalises every impression whose attribution window closed at
// or before now: it scores the impression's events with its policy's
// Credit (each event weighted by its type's weight and, with Rules.Eta,
// the debiasing weight of its 1-based slot), decides the outcome, and in
// the same transaction updates the experiment's and the user's counts, so
// a crash or restart can neither lose nor double-count an outcome. It
// returns how many impressions it finalised. An impression whose policy
// cannot be resolved stays open and the error is returned.
func (s *Store) Finalize(ctx context.Context, now time.Time) (int, error) {
	if s.opt.ReadOnly {
		return 0, s.unwritable()
	}
	rules := s.rules.Load()
	scorer := newScorer(rules)
	cutoff := now.Add(-rules.Window)
	if !s.anyDue(cutoff) {
		return 0, nil // no write transaction, no fsync, when nothing is due
	}
	total := 0
	for {
		if err := ctx.Err(); err != nil {
			return total, fmt.Errorf("store %s: finalise: %w", s.path, err)
		}
		n, more, err := s.finalizeChunk(cutoff, scorer)
		total += n
		if err != nil || !more {
			return total, err
		}
	}
}

// finalizeChunk finalises up to chunk impressions served at or before
// cutoff and reports whether more may be waiting.
func (s *Store) finalizeChunk(cutoff time.Time, scorer *Scorer) (int, bool, error) {
	var n int
	var more bool
	var parked []error
	counted := make(map[string]*[4]int64)
	err := s.db.Update(func(tx *bolt.Tx) error {
		n, more = 0, false
		clear(counted)
		due := dueKeys(tx.Bucket(bucketOpen), cutoff)
		more = len(due) == chunk
		parked = parked[:0]
		for _, k := range due {
			o, exp, err := s.finalizeOne(tx, k, scorer)
			var pe *parkError
			if errors.As(err, &pe) {
				if err := park(tx, k, pe); err != nil {
					return err
				}
				parked = append(parked, pe)
				continue
			}
			if err != nil {
				return err
			}
			if exp != "" {
				if counted[exp] == nil {
					counted[exp] = new([4]int64)
				}
				counted[exp][o]++
			}
			n++
		}
		tx.OnCommit(func() { s.m.addOutcomes(counted) })
		return nil
	})
	if err != nil {
		return 0, false, fmt.Errorf("store %s: finalise: %w", s.path, err)
	}
	if len(parked) > 0 {
		return n, more, fmt.Errorf("store %s: finalise: %d impression(s) set aside, never counted: %w", s.path, len(parked), errors.Join(parked...))
	}
	return n, more, nil
}

// parkError is a problem with one impression's record (it cannot be
// decoded, or its policy is unknown to this riffle): the impression is set
// aside rather than failing the whole chunk, which would stall every later
// finalisation and, with it, retention.
type parkError struct{ err error }

func (e *parkError) Error() string { return e.err.Error() }
func (e *parkError) Unwrap() error { return e.err }

// park moves open-index key k to the parked bucket with the reason, so
// the impression leaves the finalisation queue but stays on disk for
// inspection (riffle export shows it as "open").
func park(tx *bolt.Tx, k []byte, why error) error {
	if err := tx.Bucket(bucketParked).Put(k, []byte(why.Error())); err != nil {
		return fmt.Errorf("park %x: %w", k, err)
	}
	if err := tx.Bucket(bucketOpen).Delete(k); err != nil {
		return fmt.Errorf("park %x: %w", k, err)
	}
	return nil
}

// anyDue reports whether some open impression was served at or before
// cutoff; a read error counts as yes so that Finalize reports it.
func (s *Store) anyDue(cutoff time.Time) bool {
	due := true
	_ = s.db.View(func(tx *bolt.Tx) error {
		k, _ := tx.Bucket(bucketOpen).Cursor().First()
		due = k != nil && !time.Unix(0, idNanos(k)).After(cutoff)
		return nil
	})
	return due
}

// dueKeys returns up to chunk open-index keys whose time is at or before
// cutoff, oldest first.
func dueKeys(open *bolt.Bucket, cutoff time.Time) [][]byte {
	limit := make([]byte, 8)
	putNanos(limit, cutoff)
	var due [][]byte
	c := open.Cursor()
	for k, _ := c.First(); k != nil && len(due) < chunk; k, _ = c.Next() {
		if bytes.Compare(k[:8], limit) > 0 {
			break
		}
		due = append(due, bytes.Clone(k))
	}
	return due
}

// finalizeOne finalises the impression behind open-index key k. It returns
// the outcome and, for an interleaved impression, its experiment.
func (s *Store) finalizeOne(tx *bolt.Tx, k []byte, scorer *Scorer) (merge.Outcome, string, error) {
	if len(k) != 8+len(ID{}) {
		return 0, "", fmt.Errorf("open index key %x: %w", k, ErrCorrupt)
	}
	id := k[8:]
	imp := tx.Bucket(bucketImp)
	rec, err := decodeRecord(id, imp.Get(id))
	if err != nil {
		return 0, "", &parkError{err}
	}
	var evs []Event
	err = eachEvent(tx, rec.ID, func(_ []byte, ev Event) error {
		evs = append(evs, ev)
		return nil
	})
	if errors.Is(err, ErrCorrupt) {
		return 0, "", &parkError{err}
	}
	if err != nil {
		return 0, "", err
	}
	exp := ""
	if rec.Interleaved() {
		rec.Score, rec.Outcome, err = scorer.Score(&rec.Impression, evs)
		if err != nil {
			return 0, "", &parkError{err}
		}
		if err := addOutcome(tx, &rec.Impression, rec.Outcome); err != nil {
			return 0, "", err
		}
		exp = rec.Experiment
	}
	rec.Final = true
	if err := imp.Put(id, encodeRecord(nil, &rec)); err != nil {
		return 0, "", fmt.Errorf("finalise impression %s: %w", rec.ID, err)
	}
	if err := tx.Bucket(bucketOpen).Delete(k); err != nil {
		return 0, "", fmt.Errorf("finalise impression %s: %w", rec.ID, err)
	}
	return rec.Outcome, exp, nil
}
