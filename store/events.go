package store

import (
	"bytes"
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"maps"
	"slices"
	"strings"
	"time"

	bolt "go.etcd.io/bbolt"

	"riffle/merge"
)

// MaxKeyLen is the longest idempotency key accepted, in bytes.
const MaxKeyLen = 256

// eventKeyLen is the length of an event's key: impression id + sequence.
const eventKeyLen = 16 + 8

// Event is one piece of feedback on a shown item.
type Event struct {
	// Impression is the id from the Riffle-Impression header.
	Impression ID
	// Item is the identity of the element the user acted on.
	Item string
	// Type is the event type, one of Rules.Events' keys ("click", ...).
	Type string
	// Time is when the user acted; zero means when the store received it.
	Time time.Time
	// Key is an optional idempotency key: a second event with the same key
	// is a duplicate whatever its other fields.
	Key string
}

// eventReq is one AddEvents call waiting for the writer.
type eventReq struct {
	evs  []Event
	errs []error
	now  time.Time
	done chan struct{}
}

// finish answers the request; a commit error replaces every success.
func (r *eventReq) finish(commitErr error) {
	if commitErr != nil {
		for i, err := range r.errs {
			if err == nil {
				r.errs[i] = commitErr
			}
		}
	}
	close(r.done)
}

// AddEvents validates evs and commits the valid ones (fsync) before it
// returns, in one transaction together with every impression still queued.
// The result holds one entry per event: nil when recorded, or an error
// wrapping ErrBadEvent, ErrUnknownImpression, ErrUnknownEvent,
// ErrItemNotShown, ErrDuplicate, ErrTooEarly or ErrTooLate (checked in that
// order), or a storage error (ErrClosed, a failed commit, ctx's error) when
// nothing could be made durable.
func (s *Store) AddEvents(ctx context.Context, evs []Event) []error {
	req := &eventReq{evs: evs, errs: make([]error, len(evs)), now: s.opt.Now(), done: make(chan struct{})}
	fail := func(err error) []error {
		for i := range req.errs {
			req.errs[i] = err
		}
		return req.errs
	}
	if len(evs) == 0 {
		return req.errs
	}
	s.mu.RLock()
	if s.closed || s.events == nil {
		s.mu.RUnlock()
		return fail(s.unwritable())
	}
	select {
	case s.events <- req:
	case <-ctx.Done():
		s.mu.RUnlock()
		return fail(fmt.Errorf("store %s: add events: %w", s.path, ctx.Err()))
	}
	s.mu.RUnlock()
	select {
	case <-req.done:
		return req.errs
	case <-ctx.Done():
		// The writer still owns req (and writes req.errs), so answer with a
		// slice of our own; whether the events were recorded is unknown.
		err := fmt.Errorf("store %s: add events (outcome unknown): %w", s.path, ctx.Err())
		errs := make([]error, len(evs))
		for i := range errs {
			errs[i] = err
		}
		return errs
	}
}

// putEvents validates and stores one request's events inside the writer's
// transaction. Validation failures go to r.errs; a returned error is a
// storage failure that aborts the transaction.
func (s *Store) putEvents(tx *bolt.Tx, rules *Rules, r *eventReq) error {
	evb, keys, imp := tx.Bucket(bucketEvents), tx.Bucket(bucketKeys), tx.Bucket(bucketImp)
	for i := range r.evs {
		ev := r.evs[i] // a copy: the caller's slice is not written
		if ev.Time.IsZero() {
			ev.Time = r.now
		}
		rec, err := checkEvent(tx, imp, keys, rules, &ev)
		if err != nil {
			r.errs[i] = err
			continue
		}
		seq, err := evb.NextSequence()
		if err != nil {
			return fmt.Errorf("event sequence: %w", err)
		}
		k := binary.BigEndian.AppendUint64(append(make([]byte, 0, eventKeyLen), rec.ID[:]...), seq)
		if err := evb.Put(k, encodeEvent(nil, &ev)); err != nil {
			return fmt.Errorf("put event on %s: %w", rec.ID, err)
		}
		if ev.Key != "" {
			if err := keys.Put([]byte(ev.Key), k); err != nil {
				return fmt.Errorf("put key of event on %s: %w", rec.ID, err)
			}
		}
	}
	return nil
}

// checkEvent returns the event's impression, or why the event is refused.
func checkEvent(tx *bolt.Tx, imp, keys *bolt.Bucket, rules *Rules, ev *Event) (*record, error) {
	id := ev.Impression
	switch {
	case ev.Item == "" || ev.Type == "":
		return nil, fmt.Errorf("event on %s: %w: item and event type are required", id, ErrBadEvent)
	case len(ev.Key) > MaxKeyLen:
		return nil, fmt.Errorf("event on %s: %w: key is %d bytes, the limit is %d", id, ErrBadEvent, len(ev.Key), MaxKeyLen)
	}
	v := imp.Get(id[:])
	if v == nil {
		return nil, fmt.Errorf("impression %s: %w", id, ErrUnknownImpression)
	}
	if _, ok := rules.Events[ev.Type]; !ok {
		return nil, fmt.Errorf("event %q on %s: %w (known: %s)", ev.Type, id, ErrUnknownEvent, eventNames(rules))
	}
	rec, err := decodeRecord(id[:], v)
	if err != nil {
		return nil, err
	}
	if slotOf(rec.Slots, ev.Item) < 0 {
		return nil, fmt.Errorf("item %q: %w %s", ev.Item, ErrItemNotShown, id)
	}
	if dup, err := isDuplicate(tx, keys, ev); err != nil || dup {
		if err == nil {
			err = fmt.Errorf("%s of %q on %s (key %q): %w", ev.Type, ev.Item, id, ev.Key, ErrDuplicate)
		}
		return nil, err
	}
	end := rec.Time.Add(rules.Window)
	switch {
	case ev.Time.Before(rec.Time):
		return nil, fmt.Errorf("%s at %s, impression %s served at %s: %w",
			ev.Type, ev.Time.Format(time.RFC3339Nano), id, rec.Time.Format(time.RFC3339Nano), ErrTooEarly)
	case rec.Final:
		return nil, fmt.Errorf("impression %s is already final: %w", id, ErrTooLate)
	case ev.Time.After(end):
		return nil, fmt.Errorf("%s at %s, window of %s closed at %s: %w",
			ev.Type, ev.Time.Format(time.RFC3339Nano), id, end.Format(time.RFC3339Nano), ErrTooLate)
	}
	return &rec, nil
}

// isDuplicate reports whether ev was already recorded: the same key when
// it has one, else the same item and type without a key.
func isDuplicate(tx *bolt.Tx, keys *bolt.Bucket, ev *Event) (bool, error) {
	if ev.Key != "" {
		return keys.Get([]byte(ev.Key)) != nil, nil
	}
	var dup bool
	err := eachEvent(tx, ev.Impression, func(_ []byte, old Event) error {
		if old.Key == "" && old.Item == ev.Item && old.Type == ev.Type {
			dup = true
			return errStop
		}
		return nil
	})
	return dup, err
}

// errStop ends an iteration early without being an error.
var errStop = errors.New("stop")

// eachEvent calls fn with every event stored for impression id, in order.
func eachEvent(tx *bolt.Tx, id ID, fn func(key []byte, ev Event) error) error {
	c := tx.Bucket(bucketEvents).Cursor()
	for k, v := c.Seek(id[:]); k != nil && bytes.HasPrefix(k, id[:]); k, v = c.Next() {
		ev, err := decodeEvent(k, v)
		if err != nil {
			return err
		}
		if err := fn(k, ev); err != nil {
			if errors.Is(err, errStop) {
				return nil
			}
			return err
		}
	}
	return nil
}

// slotOf returns the 0-based position of item in slots, or -1.
func slotOf(slots []merge.Slot, item string) int {
	for i := range slots {
		if slots[i].Item == item {
			return i
		}
	}
	return -1
}

func eventNames(r *Rules) string { return strings.Join(slices.Sorted(maps.Keys(r.Events)), ", ") }
