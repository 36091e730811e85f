package postgres

import (
	"context"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"

	"riffle/store"
)

// lockShown reads (and share-locks) the impressions behind ids.
func lockShown(ctx context.Context, tx pgx.Tx, ids [][]byte) (map[store.ID]*shown, error) {
	imps := make(map[store.ID]*shown, len(ids))
	rows, err := tx.Query(ctx, sqlLockShown, ids)
	if err != nil {
		return nil, fmt.Errorf("lock riffle_impressions: %w", err)
	}
	defer rows.Close()
	for rows.Next() {
		var id, slots []byte
		var served int64
		var state int16
		if err := rows.Scan(&id, &served, &slots, &state); err != nil {
			return nil, fmt.Errorf("read riffle_impressions: %w", err)
		}
		list, err := store.DecodeSlots(slots)
		if err != nil {
			return nil, fmt.Errorf("impression %x: %w", id, err)
		}
		im := &shown{at: time.Unix(0, served).UTC(), items: make(map[string]bool, len(list)), final: state != stateOpen}
		for _, sl := range list {
			im.items[sl.Item] = true
		}
		imps[store.ID(id)] = im
	}
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("read riffle_impressions: %w", err)
	}
	return imps, nil
}

// seenEvents are the recorded events that make a new one a duplicate:
// keys, and unkeyed (impression, item, type) triples.
type seenEvents struct {
	keys    map[string]bool
	unkeyed map[unkeyed]bool
}

type unkeyed struct {
	id         store.ID
	item, kind string
}

func (d *seenEvents) has(ev *store.Event) bool {
	if ev.Key != "" {
		return d.keys[ev.Key]
	}
	return d.unkeyed[unkeyed{ev.Impression, ev.Item, ev.Type}]
}

func (d *seenEvents) add(ev *store.Event) {
	if ev.Key != "" {
		d.keys[ev.Key] = true
		return
	}
	d.unkeyed[unkeyed{ev.Impression, ev.Item, ev.Type}] = true
}

// existing reads the recorded events that the valid events could
// duplicate.
func existing(ctx context.Context, tx pgx.Tx, evs []store.Event, errs []error) (*seenEvents, error) {
	d := &seenEvents{keys: map[string]bool{}, unkeyed: map[unkeyed]bool{}}
	var keys []string
	for i := range evs {
		if errs[i] == nil && evs[i].Key != "" {
			keys = append(keys, evs[i].Key)
		}
	}
	rows, err := tx.Query(ctx, sqlExisting, keys, idsOf(evs, errs))
	if err != nil {
		return nil, fmt.Errorf("read riffle_events: %w", err)
	}
	defer rows.Close()
	for rows.Next() {
		var id []byte
		var ev store.Event
		if err := rows.Scan(&id, &ev.Item, &ev.Type, &ev.Key); err != nil {
			return nil, fmt.Errorf("read riffle_events: %w", err)
		}
		copy(ev.Impression[:], id)
		d.add(&ev)
	}
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("read riffle_events: %w", err)
	}
	return d, nil
}
