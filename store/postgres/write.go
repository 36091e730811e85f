package postgres

import (
	"cmp"
	"context"
	"fmt"
	"maps"
	"slices"
	"time"

	"github.com/jackc/pgx/v5"

	"riffle/store"
)

// impressionColumns are the columns COPY fills.
var impressionColumns = []string{"id", "served_ns", "experiment", "instance", "user_hash", "policy", "seed", "fallback", "slots", "request"}

const (
	// sqlWritten finds which of a retried batch's impressions are already
	// in the database (a commit whose answer was lost), so that a retry
	// neither fails on them nor counts them twice.
	sqlWritten = `SELECT id FROM riffle_impressions WHERE id = ANY($1)`
	// sqlServed adds one batch's impressions to the experiment's totals.
	sqlServed = `INSERT INTO riffle_experiments AS e (name, policy, policy_ns, first_ns, last_ns, impressions, interleaved)
VALUES ($1, $2, $3, $4, $5, $6, $7)
ON CONFLICT (name) DO UPDATE SET
	first_ns = least(e.first_ns, excluded.first_ns),
	last_ns = greatest(e.last_ns, excluded.last_ns),
	impressions = e.impressions + excluded.impressions,
	interleaved = e.interleaved + excluded.interleaved,
	policy = CASE WHEN excluded.policy <> '' AND excluded.policy_ns >= e.policy_ns THEN excluded.policy ELSE e.policy END,
	policy_ns = CASE WHEN excluded.policy <> '' AND excluded.policy_ns >= e.policy_ns THEN excluded.policy_ns ELSE e.policy_ns END`
	// sqlMinutes adds per-minute counts, in minute order (every writer
	// takes row locks in one order: users, minutes, experiments).
	sqlMinutes = `INSERT INTO riffle_minutes AS m (experiment, minute, interleaved, with_feedback)
SELECT $1, t.minute, t.interleaved, t.with_feedback
FROM unnest($2::bigint[], $3::bigint[], $4::bigint[]) AS t(minute, interleaved, with_feedback)
ORDER BY t.minute
ON CONFLICT (experiment, minute) DO UPDATE SET
	interleaved = m.interleaved + excluded.interleaved,
	with_feedback = m.with_feedback + excluded.with_feedback`
)

// served is what one batch adds to an experiment.
type served struct {
	impressions, interleaved int64
	first, last, policyAt    int64
	policy                   string
	minutes                  map[int64]int64
}

func (d *served) add(im *store.Impression) {
	n := im.Time.UnixNano()
	if d.impressions == 0 || n < d.first {
		d.first = n
	}
	d.last = max(d.last, n)
	d.impressions++
	if !im.Interleaved() {
		return
	}
	d.interleaved++
	if n >= d.policyAt {
		d.policyAt, d.policy = n, im.Policy
	}
	d.minutes[store.Minute(n)]++
}

// write stores a batch in one transaction: COPY into riffle_impressions,
// then the totals and per-minute counts.
func (s *Store) write(ctx context.Context, batch []*store.Impression, again bool) error {
	start := time.Now()
	ims := batch
	err := pgx.BeginFunc(ctx, s.pool, func(tx pgx.Tx) error {
		var err error
		if again {
			if ims, err = unwritten(ctx, tx, batch); err != nil {
				return err
			}
		}
		deltas := map[string]*served{}
		rows := make([][]any, len(ims))
		for i, im := range ims {
			if im.Time.IsZero() {
				im.Time = im.ID.Time()
			}
			rows[i] = []any{im.ID[:], im.Time.UnixNano(), im.Experiment, s.sidecar, int64(im.User),
				im.Policy, int64(im.Seed), im.Fallback, store.AppendSlots(nil, im.Slots), keptRequest(im)}
			d := deltas[im.Experiment]
			if d == nil {
				d = &served{minutes: map[int64]int64{}}
				deltas[im.Experiment] = d
			}
			d.add(im)
		}
		if _, err := tx.CopyFrom(ctx, pgx.Identifier{"riffle_impressions"}, impressionColumns, pgx.CopyFromRows(rows)); err != nil {
			return fmt.Errorf("copy into riffle_impressions: %w", err)
		}
		return addServed(ctx, tx, deltas)
	})
	s.m.commitSeconds.Observe(time.Since(start).Seconds())
	if err = s.dbErr(ctx, fmt.Sprintf("write %d impressions", len(batch)), err); err != nil {
		return err
	}
	s.m.committed.Add(float64(len(ims)))
	return nil
}

// unwritten returns the impressions of batch not yet in the database.
func unwritten(ctx context.Context, tx pgx.Tx, batch []*store.Impression) ([]*store.Impression, error) {
	ids := make([][]byte, len(batch))
	for i, im := range batch {
		ids[i] = im.ID[:]
	}
	rows, err := tx.Query(ctx, sqlWritten, ids)
	if err != nil {
		return nil, fmt.Errorf("check riffle_impressions for a retried batch: %w", err)
	}
	have, err := pgx.CollectRows(rows, pgx.RowTo[[]byte])
	if err != nil {
		return nil, fmt.Errorf("check riffle_impressions for a retried batch: %w", err)
	}
	if len(have) == 0 {
		return batch, nil
	}
	seen := make(map[store.ID]bool, len(have))
	for _, id := range have {
		seen[store.ID(id)] = true
	}
	var rest []*store.Impression
	for _, im := range batch {
		if !seen[im.ID] {
			rest = append(rest, im)
		}
	}
	return rest, nil
}

// addServed folds a batch's deltas into the experiments' rows, minutes
// first, each experiment in name order.
func addServed(ctx context.Context, tx pgx.Tx, deltas map[string]*served) error {
	names := slices.Sorted(maps.Keys(deltas))
	for _, name := range names {
		d := deltas[name]
		if err := addMinutes(ctx, tx, name, d.minutes, nil); err != nil {
			return err
		}
	}
	for _, name := range names {
		d := deltas[name]
		if _, err := tx.Exec(ctx, sqlServed, name, d.policy, d.policyAt, d.first, d.last, d.impressions, d.interleaved); err != nil {
			return fmt.Errorf("add to riffle_experiments %q: %w", name, err)
		}
	}
	return nil
}

// addMinutes adds interleaved and with-feedback counts per minute.
func addMinutes(ctx context.Context, tx pgx.Tx, experiment string, interleaved, withFeedback map[int64]int64) error {
	keys := slices.Sorted(maps.Keys(interleaved))
	for m := range withFeedback {
		if _, ok := interleaved[m]; !ok {
			keys = append(keys, m)
		}
	}
	if len(keys) == 0 {
		return nil
	}
	slices.SortFunc(keys, cmp.Compare)
	keys = slices.Compact(keys)
	ins, fb := make([]int64, len(keys)), make([]int64, len(keys))
	for i, m := range keys {
		ins[i], fb[i] = interleaved[m], withFeedback[m]
	}
	if _, err := tx.Exec(ctx, sqlMinutes, experiment, keys, ins, fb); err != nil {
		return fmt.Errorf("add to riffle_minutes %q: %w", experiment, err)
	}
	return nil
}

// keptRequest is the request column of im: its encoded kept request, or
// NULL.
func keptRequest(im *store.Impression) any {
	if im.Request == nil {
		return nil
	}
	return store.AppendRequest(nil, im.Request)
}
