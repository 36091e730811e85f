// Package simulate runs interleaving experiments offline so that a team can
// choose a policy before going live. Each experiment interleaves two
// rankers of known quality (the better one by NDCG on the same judgements)
// on synthetic queries, or on a team's own TREC-style judgements and runs,
// for users who click by a published click model, and scores each policy
// by its fidelity (how often it prefers the truly better ranker), its
// sensitivity (how soon the always-valid sequential test of merge/verdict
// decides) and its bias (the preference it reports under random clicks,
// which should be none).
//
// Every random choice comes from Config.Seed, so a report is reproducible.
// Run may be called from several goroutines at once; the policies it is
// given must be safe for concurrent use, as merge's are.
package simulate

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"sync"

	"riffle/merge"
	"riffle/merge/verdict"
)

// Config describes a simulation. Zero fields take the documented defaults.
type Config struct {
	// Policies are the interleaving policies to compare; at least one.
	Policies []merge.Policy
	// ClickModel names the users' click model (see NewClickModel).
	// Default "navigational".
	ClickModel string
	// Eta is the position model's examination exponent; 0 means 1.
	Eta float64
	// Impressions is the number of impressions of one experiment.
	// Default 10000.
	Impressions int
	// Runs is the number of experiments per policy. Default 20.
	Runs int
	// Queries is the number of synthetic queries of one experiment.
	// Default 50; ignored when Data is set.
	Queries int
	// Slots is the merged list's length and NDCG's cutoff. Default 10.
	Slots int
	// Seed fixes every random choice of the simulation.
	Seed uint64
	// Alpha is the sequential test's significance level. Default 0.05.
	Alpha float64
	// MDE is the minimum detectable effect that shapes the sequential
	// test's mixture (see verdict.MixtureForMDE). Default 0.02.
	MDE float64
	// Data, when set, are judged queries (see Judge) that every experiment
	// uses instead of synthetic ones; experiments then differ only in the
	// users' random choices.
	Data []Query
	// Workers bounds the goroutines Run uses; 0 means GOMAXPROCS.
	Workers int
}

// withDefaults returns c with zero fields defaulted, or an error wrapping
// ErrConfig naming the first bad field.
func (c Config) withDefaults() (Config, error) {
	if c.ClickModel == "" {
		c.ClickModel = "navigational"
	}
	defaults := []struct {
		name string
		v    *int
		def  int
	}{{"Impressions", &c.Impressions, 10000}, {"Runs", &c.Runs, 20}, {"Queries", &c.Queries, 50},
		{"Slots", &c.Slots, 10}, {"Workers", &c.Workers, runtime.GOMAXPROCS(0)}}
	for _, d := range defaults {
		if *d.v == 0 {
			*d.v = d.def
		}
		if *d.v < 0 {
			return c, fmt.Errorf("simulate: %s %d: %w: want a positive number", d.name, *d.v, ErrConfig)
		}
	}
	if c.Alpha == 0 {
		c.Alpha = 0.05
	}
	if c.MDE == 0 {
		c.MDE = 0.02
	}
	if !(c.Alpha > 0 && c.Alpha < 1) || !(c.MDE > 0 && c.MDE < 0.5) {
		return c, fmt.Errorf("simulate: alpha %v, mde %v: %w: want alpha in (0,1) and mde in (0,0.5)", c.Alpha, c.MDE, ErrConfig)
	}
	if len(c.Policies) == 0 {
		return c, fmt.Errorf("simulate: %w: no policy to simulate", ErrConfig)
	}
	return c, nil
}

// kind is one of the three simulations made of every experiment.
type kind int

const (
	kindModel   kind = iota // the configured click model on the experiment's lists
	kindRandom              // random clicks on the experiment's lists
	kindRotated             // one random click, with B replaced by A rotated up by one
	kinds
)

// experiment is one run's data: its queries and which ranker is better.
type experiment struct {
	qs, rotated []Query
	truth       int // +1 when B's mean NDCG is higher, -1 when A's is, 0 on a tie
	ndcgA       float64
	ndcgB       float64
}

// task is one simulation of one policy on one experiment.
type task struct {
	run, policy int
	kind        kind
}

// Run simulates every policy of c on c.Runs experiments and reports on
// each. It stops early, returning ctx's error, when ctx is done.
func Run(ctx context.Context, c Config) (*Report, error) {
	c, err := c.withDefaults()
	if err != nil {
		return nil, err
	}
	model, err := NewClickModel(c.ClickModel, c.Eta)
	if err != nil {
		return nil, err
	}
	random, _ := NewClickModel("random", 0)
	exps := make([]experiment, c.Runs)
	for r := range exps {
		exps[r] = c.experiment(r)
	}
	tasks := make([]task, 0, c.Runs*len(c.Policies)*int(kinds))
	for r := range exps {
		for p := range c.Policies {
			for k := range kinds {
				tasks = append(tasks, task{r, p, k})
			}
		}
	}
	results := make([]tally, len(tasks))
	mix := verdict.MixtureForMDE(c.MDE)
	err = parallel(ctx, c.Workers, len(tasks), func(i int) error {
		t := tasks[i]
		e := &exps[t.run]
		qs, m := e.qs, model
		switch t.kind {
		case kindRandom:
			m = random
		case kindRotated:
			qs, m = e.rotated, oneClick{}
		}
		s := sim{policy: c.Policies[t.policy], qs: qs, model: m, slots: c.Slots, mix: mix, alpha: c.Alpha}
		var err error
		results[i], err = s.run(ctx, c.Impressions, c.stream(t.run, uint64(t.kind)))
		return err
	})
	if err != nil {
		return nil, err
	}
	return c.report(exps, tasks, results), nil
}

// experiment returns run r's data, drawn from its own stream. Synthetic
// rankers get noise levels drawn per run so that the experiments cover
// both clear and close comparisons: the incumbent's noise is uniform in
// [0.5, 2] and the challenger's is that times e^u with u uniform in
// [-0.4, 0.4] (this project's choice).
func (c Config) experiment(r int) experiment {
	qs := c.Data
	if qs == nil {
		rng := c.stream(r, 100)
		noiseA := 0.5 + 1.5*rng.Float64()
		noiseB := noiseA * math.Exp(0.8*rng.Float64()-0.4)
		qs = Synthetic(rng, c.Queries, c.Slots, noiseA, noiseB)
	}
	e := experiment{qs: qs, rotated: Rotated(qs)}
	e.ndcgA, e.ndcgB = MeanNDCG(qs, c.Slots)
	switch {
	case e.ndcgB > e.ndcgA:
		e.truth = 1
	case e.ndcgA > e.ndcgB:
		e.truth = -1
	}
	return e
}

// stream returns the random source for one purpose of run r.
func (c Config) stream(r int, purpose uint64) *rand.Rand {
	return rand.New(rand.NewPCG(c.Seed, purpose<<32|uint64(r)))
}

// parallel calls fn(0..n-1) on at most workers goroutines and returns the
// first error; it stops handing out work once ctx is done or fn fails.
func parallel(ctx context.Context, workers, n int, fn func(int) error) error {
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	next := make(chan int)
	errs := make(chan error, workers)
	var wg sync.WaitGroup
	for range min(workers, n) {
		wg.Go(func() {
			for i := range next {
				if err := fn(i); err != nil {
					errs <- err
					cancel()
					return
				}
			}
		})
	}
feed:
	for i := range n {
		select {
		case next <- i:
		case <-ctx.Done():
			break feed
		}
	}
	close(next)
	wg.Wait()
	select {
	case err := <-errs:
		return err
	default:
	}
	return ctx.Err()
}
