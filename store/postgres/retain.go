package postgres

import (
	"context"
	"fmt"
	"time"

	"github.com/jackc/pgx/v5"

	"riffle/store"
)

// retainBatch bounds the impressions one retention transaction deletes,
// so that it never holds many row locks nor a table lock: the data plane's
// writer and the finalisers keep going beside it.
const retainBatch = 1000

const (
	// sqlRetain deletes a batch of final impressions older than the
	// limit; SKIP LOCKED leaves rows another transaction holds for a later
	// pass. Open impressions (state 0) are never deleted, whatever their
	// age, nor set-aside ones (state 2).
	sqlRetain = `DELETE FROM riffle_impressions WHERE id IN (
	SELECT id FROM riffle_impressions WHERE state = 1 AND served_ns < $1 ORDER BY served_ns LIMIT $2 FOR UPDATE SKIP LOCKED)
RETURNING id`
	sqlRetainEvents = `DELETE FROM riffle_events WHERE impression = ANY($1)`
	// sqlPruneMinutes drops per-minute counts older than MinuteKeep
	// before each experiment's newest impression, as the bbolt store does.
	sqlPruneMinutes = `DELETE FROM riffle_minutes AS m USING riffle_experiments AS e
WHERE m.experiment = e.name AND m.minute < (e.last_ns - $1) / 60000000000`
)

// Retain deletes final impressions served more than the retention before
// now, with their events, in batches of retainBatch each in its own
// transaction; aggregates stay. It also prunes old per-minute counts. It
// returns how many impressions it deleted; zero retention deletes none.
func (s *Store) Retain(ctx context.Context, now time.Time) (int, error) {
	if s.opt.ReadOnly {
		return 0, s.unwritable()
	}
	if _, err := s.pool.Exec(ctx, sqlPruneMinutes, int64(store.MinuteKeep)); err != nil {
		return 0, s.dbErr(ctx, "prune riffle_minutes", err)
	}
	if s.opt.Retention <= 0 {
		return 0, nil
	}
	limit := now.Add(-s.opt.Retention).UnixNano()
	total := 0
	for {
		var n int
		err := pgx.BeginFunc(ctx, s.pool, func(tx pgx.Tx) error {
			rows, err := tx.Query(ctx, sqlRetain, limit, retainBatch)
			if err != nil {
				return fmt.Errorf("delete from riffle_impressions: %w", err)
			}
			ids, err := pgx.CollectRows(rows, pgx.RowTo[[]byte])
			if err != nil {
				return fmt.Errorf("delete from riffle_impressions: %w", err)
			}
			n = len(ids)
			if n == 0 {
				return nil
			}
			if _, err := tx.Exec(ctx, sqlRetainEvents, ids); err != nil {
				return fmt.Errorf("delete from riffle_events: %w", err)
			}
			return nil
		})
		if err = s.dbErr(ctx, "retention", err); err != nil {
			return total, err
		}
		total += n
		if n < retainBatch {
			return total, nil
		}
	}
}
