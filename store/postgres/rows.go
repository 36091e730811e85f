package postgres

import (
	"context"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"

	"riffle/merge"
	"riffle/store"
)

// Impression states in riffle_impressions.state.
const (
	stateOpen   = 0
	stateFinal  = 1
	stateParked = 2
)

// stored is one impression read back with its events and result.
type stored struct {
	im  store.Impression
	evs []store.Event
	fin *store.Final // nil while open (or set aside)
}

// scanImpression reads the impression columns every query selects first:
// id, served_ns, experiment, user_hash, policy, seed, fallback, slots.
func scanImpression(row pgx.Row, im *store.Impression, extra ...any) error {
	var id, slots []byte
	var served, user, seed int64
	dst := append([]any{&id, &served, &im.Experiment, &user, &im.Policy, &seed, &im.Fallback, &slots}, extra...)
	if err := row.Scan(dst...); err != nil {
		return err
	}
	if len(id) != len(im.ID) {
		return fmt.Errorf("impression id %x: %w", id, store.ErrCorrupt)
	}
	copy(im.ID[:], id)
	im.Time = time.Unix(0, served).UTC()
	im.User, im.Seed = uint64(user), uint64(seed)
	var err error
	if im.Slots, err = store.DecodeSlots(slots); err != nil {
		return fmt.Errorf("impression %s: %w", im.ID, err)
	}
	return nil
}

// exportPageOf reads up to exportPage impressions served at or after from
// with ids after after, with their events.
func exportPageOf(ctx context.Context, tx pgx.Tx, from int64, after []byte) ([]stored, error) {
	rows, err := tx.Query(ctx, sqlExportPage, from, after, exportPage)
	if err != nil {
		return nil, fmt.Errorf("read riffle_impressions: %w", err)
	}
	var page []stored
	for rows.Next() {
		var r stored
		var state int16
		var outcome *int16
		var inc, chal *float64
		var req []byte
		if err := scanImpression(rows, &r.im, &state, &outcome, &inc, &chal, &req); err != nil {
			rows.Close()
			return nil, fmt.Errorf("read riffle_impressions: %w", err)
		}
		if req != nil {
			q, err := store.DecodeRequest(req)
			if err != nil {
				rows.Close()
				return nil, fmt.Errorf("read riffle_impressions: impression %s: %w", r.im.ID, err)
			}
			r.im.Request = q
		}
		if state == stateFinal && outcome != nil {
			r.fin = &store.Final{Outcome: merge.Outcome(*outcome)}
			if inc != nil && chal != nil {
				r.fin.Score = merge.Score{Incumbent: *inc, Challenger: *chal}
			}
		}
		page = append(page, r)
	}
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("read riffle_impressions: %w", err)
	}
	return page, attachEvents(ctx, tx, page)
}

// attachEvents reads the events of every impression in page, in the order
// they were accepted.
func attachEvents(ctx context.Context, tx pgx.Tx, page []stored) error {
	if len(page) == 0 {
		return nil
	}
	at := make(map[store.ID]int, len(page))
	ids := make([][]byte, len(page))
	for i := range page {
		at[page[i].im.ID] = i
		ids[i] = page[i].im.ID[:]
	}
	rows, err := tx.Query(ctx, sqlEventsOf, ids)
	if err != nil {
		return fmt.Errorf("read riffle_events: %w", err)
	}
	defer rows.Close()
	for rows.Next() {
		var id []byte
		var ev store.Event
		var ns int64
		if err := rows.Scan(&id, &ev.Item, &ev.Type, &ns, &ev.Key); err != nil {
			return fmt.Errorf("read riffle_events: %w", err)
		}
		copy(ev.Impression[:], id)
		ev.Time = time.Unix(0, ns).UTC()
		if i, ok := at[ev.Impression]; ok {
			page[i].evs = append(page[i].evs, ev)
		}
	}
	if err := rows.Err(); err != nil {
		return fmt.Errorf("read riffle_events: %w", err)
	}
	return nil
}
