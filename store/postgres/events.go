package postgres

import (
	"context"
	"fmt"
	"maps"
	"slices"
	"strings"
	"time"

	"github.com/jackc/pgx/v5"

	"riffle/store"
)

const (
	sqlKnown = `SELECT id FROM riffle_impressions WHERE id = ANY($1)`
	// sqlLockShown reads the events' impressions and holds them against a
	// finaliser (which claims with FOR UPDATE SKIP LOCKED) until the events
	// commit, so an accepted event is always in its impression's outcome.
	sqlLockShown = `SELECT id, served_ns, slots, state FROM riffle_impressions WHERE id = ANY($1) ORDER BY id FOR SHARE`
	sqlExisting  = `SELECT impression, item, type, coalesce(key, '') FROM riffle_events
WHERE key = ANY($1) OR (impression = ANY($2) AND key IS NULL)`
	// sqlInsertEvent inserts one event; a concurrent twin (same key, or
	// same unkeyed impression, item and type) makes it a no-op.
	sqlInsertEvent = `INSERT INTO riffle_events (impression, item, type, at_ns, key) VALUES ($1, $2, $3, $4, nullif($5, '')) ON CONFLICT DO NOTHING`
)

// shown is what an event is checked against.
type shown struct {
	at    time.Time
	items map[string]bool
	final bool
}

// AddEvents validates evs and commits the valid ones before it returns,
// in one transaction, whichever sidecar served their impressions. The
// result holds one entry per event, with the bbolt store's errors in its
// order (ErrBadEvent, ErrUnknownImpression, ErrUnknownEvent,
// ErrItemNotShown, ErrDuplicate, ErrTooEarly, ErrTooLate), or an error
// wrapping store.ErrUnavailable when the database could not commit.
// An impression served in the last PendingAge that is not in the database
// yet (another sidecar's queue holds it) is waited for, at most
// PendingWait, before its events are refused as unknown.
func (s *Store) AddEvents(ctx context.Context, evs []store.Event) []error {
	errs := make([]error, len(evs))
	if len(evs) == 0 {
		return errs
	}
	s.mu.RLock()
	closed := s.closed || s.queue == nil
	s.mu.RUnlock()
	if closed {
		return fill(errs, s.unwritable())
	}
	now, rules := s.opt.Now(), s.rules.Load()
	batch := make([]store.Event, len(evs))
	for i, ev := range evs {
		if ev.Time.IsZero() {
			ev.Time = now
		}
		batch[i] = ev
		errs[i] = checkFields(&ev)
	}
	ids := idsOf(batch, errs)
	if len(ids) == 0 {
		return errs
	}
	if err := s.awaitImpressions(ctx, ids, now); err != nil {
		return failRest(errs, err)
	}
	err := pgx.BeginFunc(ctx, s.pool, func(tx pgx.Tx) error {
		return s.putEvents(ctx, tx, rules, batch, errs)
	})
	if err = s.dbErr(ctx, "add events", err); err != nil {
		// Nothing was committed: a refusal decided inside the transaction
		// may not hold on retry either way, so every event gets the error.
		return fill(errs, err)
	}
	return errs
}

// failRest sets the entries of errs still nil to err.
func failRest(errs []error, err error) []error {
	for i := range errs {
		if errs[i] == nil {
			errs[i] = err
		}
	}
	return errs
}

// fill sets every entry of errs to err.
func fill(errs []error, err error) []error {
	for i := range errs {
		errs[i] = err
	}
	return errs
}

// checkFields checks what needs no database.
func checkFields(ev *store.Event) error {
	switch {
	case ev.Item == "" || ev.Type == "":
		return fmt.Errorf("event on %s: %w: item and event type are required", ev.Impression, store.ErrBadEvent)
	case len(ev.Key) > store.MaxKeyLen:
		return fmt.Errorf("event on %s: %w: key is %d bytes, the limit is %d", ev.Impression, store.ErrBadEvent, len(ev.Key), store.MaxKeyLen)
	}
	return nil
}

// idsOf returns the distinct impression ids of the events still valid.
func idsOf(evs []store.Event, errs []error) [][]byte {
	seen := map[store.ID]bool{}
	var ids [][]byte
	for i := range evs {
		if errs[i] == nil && !seen[evs[i].Impression] {
			seen[evs[i].Impression] = true
			ids = append(ids, evs[i].Impression[:])
		}
	}
	return ids
}

// awaitImpressions waits, at most PendingWait, for the recent impressions
// among ids that are not in the database yet: another sidecar may still
// hold them in its queue, or this one (which it flushes).
func (s *Store) awaitImpressions(ctx context.Context, ids [][]byte, now time.Time) error {
	var deadline time.Time
	flushed := false
	for {
		missing, err := s.missing(ctx, ids)
		if err != nil {
			return err
		}
		var wait [][]byte
		for _, id := range missing {
			if age := now.Sub(store.ID(id).Time()); age < s.cfg.PendingAge && age > -s.cfg.PendingAge {
				wait = append(wait, id)
			}
		}
		if len(wait) == 0 {
			return nil
		}
		if deadline.IsZero() {
			deadline = time.Now().Add(s.cfg.PendingWait)
		} else if time.Now().After(deadline) {
			return nil // refused as unknown in the transaction
		}
		ids = wait
		if !flushed {
			flushed = true
			_ = s.Flush(ctx) // this sidecar's own queue; an error shows in the next check
			continue
		}
		select {
		case <-ctx.Done():
			return fmt.Errorf("store postgres: add events: %w", ctx.Err())
		case <-time.After(25 * time.Millisecond):
		}
	}
}

// missing returns the ids not in riffle_impressions.
func (s *Store) missing(ctx context.Context, ids [][]byte) ([][]byte, error) {
	qctx, cancel := context.WithTimeout(ctx, s.opt.Timeout)
	defer cancel()
	rows, err := s.pool.Query(qctx, sqlKnown, ids)
	var have [][]byte
	if err == nil {
		have, err = pgx.CollectRows(rows, pgx.RowTo[[]byte])
	}
	if err = s.dbErr(qctx, "look up riffle_impressions", err); err != nil {
		return nil, err
	}
	known := map[store.ID]bool{}
	for _, id := range have {
		known[store.ID(id)] = true
	}
	var out [][]byte
	for _, id := range ids {
		if !known[store.ID(id)] {
			out = append(out, id)
		}
	}
	return out, nil
}

// putEvents checks and inserts the valid events inside tx.
func (s *Store) putEvents(ctx context.Context, tx pgx.Tx, rules *store.Rules, evs []store.Event, errs []error) error {
	imps, err := lockShown(ctx, tx, idsOf(evs, errs))
	if err != nil {
		return err
	}
	dups, err := existing(ctx, tx, evs, errs)
	if err != nil {
		return err
	}
	b := &pgx.Batch{}
	var queued []int
	for i := range evs {
		if errs[i] != nil {
			continue
		}
		ev := &evs[i]
		if errs[i] = checkEvent(imps, dups, rules, ev); errs[i] != nil {
			continue
		}
		dups.add(ev)
		b.Queue(sqlInsertEvent, ev.Impression[:], ev.Item, ev.Type, ev.Time.UnixNano(), ev.Key)
		queued = append(queued, i)
	}
	if len(queued) == 0 {
		return nil
	}
	res := tx.SendBatch(ctx, b)
	for _, i := range queued {
		tag, err := res.Exec()
		if err != nil {
			_ = res.Close()
			return fmt.Errorf("insert into riffle_events: %w", err)
		}
		if tag.RowsAffected() == 0 { // a twin committed by another request meanwhile
			errs[i] = duplicate(&evs[i])
		}
	}
	return res.Close()
}

// checkEvent returns why ev is refused, in the bbolt store's order.
func checkEvent(imps map[store.ID]*shown, dups *seenEvents, rules *store.Rules, ev *store.Event) error {
	id := ev.Impression
	im := imps[id]
	if im == nil {
		return fmt.Errorf("impression %s: %w", id, store.ErrUnknownImpression)
	}
	if _, ok := rules.Events[ev.Type]; !ok {
		names := slices.Sorted(maps.Keys(rules.Events))
		return fmt.Errorf("event %q on %s: %w (known: %s)", ev.Type, id, store.ErrUnknownEvent, strings.Join(names, ", "))
	}
	if !im.items[ev.Item] {
		return fmt.Errorf("item %q: %w %s", ev.Item, store.ErrItemNotShown, id)
	}
	if dups.has(ev) {
		return duplicate(ev)
	}
	end := im.at.Add(rules.Window)
	switch {
	case ev.Time.Before(im.at):
		return fmt.Errorf("%s at %s, impression %s served at %s: %w",
			ev.Type, ev.Time.Format(time.RFC3339Nano), id, im.at.Format(time.RFC3339Nano), store.ErrTooEarly)
	case im.final:
		return fmt.Errorf("impression %s is already final: %w", id, store.ErrTooLate)
	case ev.Time.After(end):
		return fmt.Errorf("%s at %s, window of %s closed at %s: %w",
			ev.Type, ev.Time.Format(time.RFC3339Nano), id, end.Format(time.RFC3339Nano), store.ErrTooLate)
	}
	return nil
}

func duplicate(ev *store.Event) error {
	return fmt.Errorf("%s of %q on %s (key %q): %w", ev.Type, ev.Item, ev.Impression, ev.Key, store.ErrDuplicate)
}
