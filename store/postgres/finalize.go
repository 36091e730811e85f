package postgres

import (
	"context"
	"errors"
	"fmt"
	"maps"
	"slices"
	"time"

	"github.com/jackc/pgx/v5"

	"riffle/merge"
	"riffle/store"
)

// finalizeChunk bounds the impressions one finalisation transaction
// claims, so that it holds its row locks briefly.
const finalizeChunk = 512

const (
	// sqlClaim claims due open impressions. FOR UPDATE SKIP LOCKED gives
	// each sidecar's finaliser rows no other transaction holds: two
	// finalisers never wait on each other nor take the same impression,
	// and an impression whose events are being committed (they hold it
	// FOR SHARE) is skipped until they are, so its outcome includes them.
	// A finaliser killed mid-way holds its locks only until its session
	// ends; its transaction rolls back whole, and the rows are claimed
	// again.
	sqlClaim = `SELECT id, served_ns, experiment, user_hash, policy, seed, fallback, slots FROM riffle_impressions
WHERE state = 0 AND served_ns <= $1 ORDER BY served_ns LIMIT $2 FOR UPDATE SKIP LOCKED`
	sqlSetFinal = `UPDATE riffle_impressions AS i
SET state = t.state, outcome = t.outcome, score_incumbent = t.inc, score_challenger = t.chal, why = nullif(t.why, '')
FROM unnest($1::bytea[], $2::smallint[], $3::smallint[], $4::float8[], $5::float8[], $6::text[]) AS t(id, state, outcome, inc, chal, why)
WHERE i.id = t.id`
	sqlAddUsers = `INSERT INTO riffle_users AS u (experiment, user_hash, out_none, out_incumbent, out_challenger, out_tie)
SELECT $1, t.usr, t.n0, t.n1, t.n2, t.n3
FROM unnest($2::bigint[], $3::bigint[], $4::bigint[], $5::bigint[], $6::bigint[]) AS t(usr, n0, n1, n2, n3)
ORDER BY t.usr
ON CONFLICT (experiment, user_hash) DO UPDATE SET
	out_none = u.out_none + excluded.out_none, out_incumbent = u.out_incumbent + excluded.out_incumbent,
	out_challenger = u.out_challenger + excluded.out_challenger, out_tie = u.out_tie + excluded.out_tie`
	sqlAddOutcomes = `UPDATE riffle_experiments SET out_none = out_none + $2, out_incumbent = out_incumbent + $3,
	out_challenger = out_challenger + $4, out_tie = out_tie + $5 WHERE name = $1`
)

// Finalize finalises every open impression served at or before now minus
// the window, in chunks, each in one transaction that claims the
// impressions, scores them with the policies' credit (store.Scorer, the
// code the bbolt store uses) and writes their outcomes, the per-user
// counts, the per-minute counts and the totals, so that a crash loses
// nothing and counts nothing twice. Sidecars finalise concurrently
// without taking one impression twice. An impression that cannot be
// scored is set aside (state 2, its reason kept) and reported.
func (s *Store) Finalize(ctx context.Context, now time.Time) (int, error) {
	if s.opt.ReadOnly {
		return 0, s.unwritable()
	}
	rules := s.rules.Load()
	scorer, err := store.NewScorer(*rules)
	if err != nil {
		return 0, err
	}
	cutoff := now.Add(-rules.Window).UnixNano()
	total := 0
	var parked []error
	for {
		var n int
		var aside []error
		err := pgx.BeginFunc(ctx, s.pool, func(tx pgx.Tx) error {
			var err error
			n, aside, err = finalizeOnce(ctx, tx, scorer, cutoff)
			return err
		})
		if err = s.dbErr(ctx, "finalise", err); err != nil {
			return total, err
		}
		total += n
		parked = append(parked, aside...)
		if n+len(aside) < finalizeChunk {
			break
		}
	}
	if len(parked) > 0 {
		return total, fmt.Errorf("store postgres: finalise: %d impression(s) set aside, never counted: %w", len(parked), errors.Join(parked...))
	}
	return total, nil
}

// tally is one chunk's additions to an experiment.
type tally struct {
	outcomes [4]int64
	users    map[uint64][4]int64
	feedback map[int64]int64 // per minute
}

// finalizeOnce claims and finalises one chunk; it returns how many it
// finalised and the reasons of those it set aside.
func finalizeOnce(ctx context.Context, tx pgx.Tx, scorer *store.Scorer, cutoff int64) (int, []error, error) {
	page, err := claim(ctx, tx, cutoff)
	if err != nil || len(page) == 0 {
		return 0, nil, err
	}
	if err := attachEvents(ctx, tx, page); err != nil {
		return 0, nil, err
	}
	var upd finalRows
	var aside []error
	tallies := map[string]*tally{}
	for i := range page {
		im := &page[i].im
		if !im.Interleaved() {
			upd.add(im.ID, stateFinal, merge.NoFeedback, merge.Score{}, "")
			continue
		}
		score, o, err := scorer.Score(im, page[i].evs)
		if err != nil {
			upd.add(im.ID, stateParked, 0, merge.Score{}, err.Error())
			aside = append(aside, err)
			continue
		}
		upd.add(im.ID, stateFinal, o, score, "")
		t := tallies[im.Experiment]
		if t == nil {
			t = &tally{users: map[uint64][4]int64{}, feedback: map[int64]int64{}}
			tallies[im.Experiment] = t
		}
		t.add(im, o)
	}
	if _, err := tx.Exec(ctx, sqlSetFinal, upd.ids, upd.states, upd.outcomes, upd.inc, upd.chal, upd.why); err != nil {
		return 0, nil, fmt.Errorf("update riffle_impressions: %w", err)
	}
	if err := addTallies(ctx, tx, tallies); err != nil {
		return 0, nil, err
	}
	return len(page) - len(aside), aside, nil
}

func (t *tally) add(im *store.Impression, o merge.Outcome) {
	t.outcomes[o]++
	if im.User != 0 {
		c := t.users[im.User]
		c[o]++
		t.users[im.User] = c
	}
	if o != merge.NoFeedback {
		t.feedback[store.Minute(im.Time.UnixNano())]++
	}
}

// claim reads up to finalizeChunk due impressions, locked.
func claim(ctx context.Context, tx pgx.Tx, cutoff int64) ([]stored, error) {
	rows, err := tx.Query(ctx, sqlClaim, cutoff, finalizeChunk)
	if err != nil {
		return nil, fmt.Errorf("claim riffle_impressions: %w", err)
	}
	defer rows.Close()
	var page []stored
	for rows.Next() {
		var r stored
		if err := scanImpression(rows, &r.im); err != nil {
			return nil, fmt.Errorf("claim riffle_impressions: %w", err)
		}
		page = append(page, r)
	}
	if err := rows.Err(); err != nil {
		return nil, fmt.Errorf("claim riffle_impressions: %w", err)
	}
	return page, nil
}

// finalRows are the columns of sqlSetFinal's unnest.
type finalRows struct {
	ids              [][]byte
	states, outcomes []int16
	inc, chal        []float64
	why              []string
}

func (f *finalRows) add(id store.ID, state int16, o merge.Outcome, s merge.Score, why string) {
	f.ids = append(f.ids, id[:])
	f.states = append(f.states, state)
	f.outcomes = append(f.outcomes, int16(o))
	f.inc = append(f.inc, s.Incumbent)
	f.chal = append(f.chal, s.Challenger)
	f.why = append(f.why, why)
}

// addTallies writes a chunk's counts: users, then minutes, then the
// experiments' totals, each in key order (the writer's lock order).
func addTallies(ctx context.Context, tx pgx.Tx, tallies map[string]*tally) error {
	names := slices.Sorted(maps.Keys(tallies))
	for _, name := range names {
		users := slices.Sorted(maps.Keys(tallies[name].users))
		if len(users) == 0 {
			continue
		}
		cols := [5][]int64{}
		for _, u := range users {
			c := tallies[name].users[u]
			cols[0] = append(cols[0], int64(u))
			for i := range c {
				cols[i+1] = append(cols[i+1], c[i])
			}
		}
		if _, err := tx.Exec(ctx, sqlAddUsers, name, cols[0], cols[1], cols[2], cols[3], cols[4]); err != nil {
			return fmt.Errorf("add to riffle_users %q: %w", name, err)
		}
	}
	for _, name := range names {
		if err := addMinutes(ctx, tx, name, nil, tallies[name].feedback); err != nil {
			return err
		}
	}
	for _, name := range names {
		o := tallies[name].outcomes
		if _, err := tx.Exec(ctx, sqlAddOutcomes, name, o[0], o[1], o[2], o[3]); err != nil {
			return fmt.Errorf("add outcomes to riffle_experiments %q: %w", name, err)
		}
	}
	return nil
}
