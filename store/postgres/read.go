package postgres

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"time"

	"github.com/jackc/pgx/v5"

	"riffle/store"
)

const (
	sqlExperiments = `SELECT name FROM riffle_experiments ORDER BY name`
	sqlTotals      = `SELECT name, out_none, out_incumbent, out_challenger, out_tie FROM riffle_experiments`
	sqlExperiment  = `SELECT policy, first_ns, last_ns, impressions, interleaved, out_none, out_incumbent, out_challenger, out_tie
FROM riffle_experiments WHERE name = $1`
	sqlUsers  = `SELECT user_hash, out_none, out_incumbent, out_challenger, out_tie FROM riffle_users WHERE experiment = $1 AND user_hash <> 0`
	sqlRecent = `SELECT coalesce(sum(interleaved), 0), coalesce(sum(with_feedback), 0) FROM riffle_minutes WHERE experiment = $1 AND minute >= $2`
)

// readTx runs fn in a read-only repeatable-read transaction, one snapshot
// of the database, bounded by the timeout.
func (s *Store) readTx(ctx context.Context, what string, fn func(tx pgx.Tx) error) error {
	ctx, cancel := context.WithTimeout(ctx, s.opt.Timeout)
	defer cancel()
	err := pgx.BeginTxFunc(ctx, s.pool, pgx.TxOptions{IsoLevel: pgx.RepeatableRead, AccessMode: pgx.ReadOnly}, fn)
	return s.dbErr(ctx, what, err)
}

// Experiments returns the names of every experiment in the database.
func (s *Store) Experiments(ctx context.Context) ([]string, error) {
	var names []string
	err := s.readTx(ctx, "list riffle_experiments", func(tx pgx.Tx) error {
		rows, err := tx.Query(ctx, sqlExperiments)
		if err != nil {
			return err
		}
		names, err = pgx.CollectRows(rows, pgx.RowTo[string])
		return err
	})
	if names == nil {
		names = []string{}
	}
	return names, err
}

// Aggregate returns the fleet's counts for the experiment, read in one
// snapshot: its totals, its per-user counts and the recent per-minute
// counts (the 60 whole minutes up to its newest impression's minute, as
// the bbolt store counts them).
func (s *Store) Aggregate(ctx context.Context, experiment string) (store.Aggregate, error) {
	a := store.Aggregate{Experiment: experiment, Users: map[uint64][4]int64{}}
	err := s.readTx(ctx, "aggregate "+experiment, func(tx pgx.Tx) error {
		var first, last int64
		err := tx.QueryRow(ctx, sqlExperiment, experiment).Scan(&a.Policy, &first, &last, &a.Impressions, &a.Interleaved,
			&a.Outcomes[0], &a.Outcomes[1], &a.Outcomes[2], &a.Outcomes[3])
		if errors.Is(err, pgx.ErrNoRows) {
			return nil
		}
		if err != nil {
			return fmt.Errorf("read riffle_experiments: %w", err)
		}
		a.Start, a.RecentEnd = time.Unix(0, first).UTC(), time.Unix(0, last).UTC()
		a.RecentSpan = min(store.RecentSpan, a.RecentEnd.Sub(a.Start))
		if err := readUsers(ctx, tx, experiment, a.Users); err != nil {
			return err
		}
		from := store.Minute(last-int64(store.RecentSpan)) + 1
		if err := tx.QueryRow(ctx, sqlRecent, experiment, from).Scan(&a.RecentImpressions, &a.RecentWithFeedback); err != nil {
			return fmt.Errorf("read riffle_minutes: %w", err)
		}
		return nil
	})
	if err != nil {
		return store.Aggregate{}, err
	}
	return a, nil
}

func readUsers(ctx context.Context, tx pgx.Tx, experiment string, users map[uint64][4]int64) error {
	rows, err := tx.Query(ctx, sqlUsers, experiment)
	if err != nil {
		return fmt.Errorf("read riffle_users: %w", err)
	}
	defer rows.Close()
	var u int64
	var c [4]int64
	for rows.Next() {
		if err := rows.Scan(&u, &c[0], &c[1], &c[2], &c[3]); err != nil {
			return fmt.Errorf("read riffle_users: %w", err)
		}
		users[uint64(u)] = c
	}
	if err := rows.Err(); err != nil {
		return fmt.Errorf("read riffle_users: %w", err)
	}
	return nil
}

// outcomeTotals reads every experiment's outcome totals.
func (s *Store) outcomeTotals(ctx context.Context) (map[string][4]int64, error) {
	totals := map[string][4]int64{}
	err := s.readTx(ctx, "read outcome totals", func(tx pgx.Tx) error {
		rows, err := tx.Query(ctx, sqlTotals)
		if err != nil {
			return err
		}
		defer rows.Close()
		var name string
		var o [4]int64
		for rows.Next() {
			if err := rows.Scan(&name, &o[0], &o[1], &o[2], &o[3]); err != nil {
				return err
			}
			totals[name] = o
		}
		return rows.Err()
	})
	return totals, err
}

// exportPage is how many impressions one export query reads.
const exportPage = 1000

const (
	sqlExportPage = `SELECT id, served_ns, experiment, user_hash, policy, seed, fallback, slots, state, outcome, score_incumbent, score_challenger, request
FROM riffle_impressions WHERE served_ns >= $1 AND id > $2 ORDER BY id LIMIT $3`
	sqlEventsOf = `SELECT impression, item, type, at_ns, coalesce(key, '') FROM riffle_events WHERE impression = ANY($1) ORDER BY impression, seq`
)

// Export writes every impression served at or after since as NDJSON in
// the bbolt store's format (store.AppendExportLine), oldest first, from
// one snapshot of the database. Unlike the file's, it is not bounded by
// the read timeout: it reads page by page until done or ctx ends.
func (s *Store) Export(ctx context.Context, w io.Writer, since time.Time) error {
	bw := bufio.NewWriter(w)
	var werr error // the writer's failure, not the database's
	var from int64
	if !since.IsZero() {
		from = since.UnixNano()
	}
	err := pgx.BeginTxFunc(ctx, s.pool, pgx.TxOptions{IsoLevel: pgx.RepeatableRead, AccessMode: pgx.ReadOnly}, func(tx pgx.Tx) error {
		after := []byte{}
		for {
			page, err := exportPageOf(ctx, tx, from, after)
			if err != nil || len(page) == 0 {
				return err
			}
			var b []byte
			for _, r := range page {
				if b, err = store.AppendExportLine(b, &r.im, r.evs, r.fin); err != nil {
					return err
				}
			}
			if _, werr = bw.Write(b); werr != nil {
				return werr
			}
			after = page[len(page)-1].im.ID[:]
		}
	})
	if werr != nil {
		return fmt.Errorf("store postgres: export: %w", werr)
	}
	if err != nil {
		return s.dbErr(ctx, "export", err)
	}
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("store postgres: export: %w", err)
	}
	return nil
}
