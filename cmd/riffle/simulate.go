package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"strings"

	"riffle/merge"
	"riffle/merge/simulate"
)

// simulateFlags are riffle simulate's settings.
type simulateFlags struct {
	cfg               simulate.Config
	policy, format    string
	qrels, runA, runB string
	seed              uint64
	tau               float64
	credit            string
	impressions, runs int
	queries, slots    int
	eta, mde, alpha   float64
	clickModel        string
}

// runSimulate compares interleaving policies offline under a click model:
// exit 0, 2 on bad flags, 1 when the data cannot be read or the run fails.
func runSimulate(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	f, err := parseSimulateFlags(args, stderr)
	if err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return 0
		}
		if !errors.Is(err, errUsage) {
			fmt.Fprintf(stderr, "riffle simulate: %v\n", err)
		}
		return 2
	}
	if f.qrels != "" {
		if f.cfg.Data, err = readJudged(f.qrels, f.runA, f.runB, f.slots); err != nil {
			fmt.Fprintf(stderr, "riffle simulate: %v\n", err)
			return 1
		}
	}
	rep, err := simulate.Run(ctx, f.cfg)
	if err != nil {
		fmt.Fprintf(stderr, "riffle simulate: %v\n", err)
		return 1
	}
	if f.format == "json" {
		err = rep.WriteJSON(stdout)
	} else {
		err = rep.WriteText(stdout)
	}
	if err != nil {
		fmt.Fprintf(stderr, "riffle simulate: %v\n", err)
		return 1
	}
	return 0
}

func parseSimulateFlags(args []string, stderr io.Writer) (simulateFlags, error) {
	var f simulateFlags
	fs := flag.NewFlagSet("riffle simulate", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.StringVar(&f.policy, "policy", "all", "policy to simulate ("+strings.Join(merge.Names(), ", ")+") or all")
	fs.StringVar(&f.clickModel, "click-model", "navigational", "users' click model: "+strings.Join(simulate.ClickModelNames(), ", "))
	fs.IntVar(&f.impressions, "impressions", 10000, "impressions per simulated experiment")
	fs.IntVar(&f.runs, "runs", 20, "simulated experiments per policy")
	fs.IntVar(&f.queries, "queries", 50, "synthetic queries per experiment")
	fs.IntVar(&f.slots, "slots", 10, "merged list length and NDCG cutoff")
	fs.Uint64Var(&f.seed, "seed", 1, "seed of every random choice")
	fs.StringVar(&f.format, "format", "text", "output format: text or json")
	fs.StringVar(&f.qrels, "qrels", "", "TREC-style qrels file with graded judgements (with --run-a and --run-b)")
	fs.StringVar(&f.runA, "run-a", "", "TREC-style run file of the incumbent")
	fs.StringVar(&f.runB, "run-b", "", "TREC-style run file of the challenger")
	fs.Float64Var(&f.eta, "eta", 1, "examination exponent of the position click model")
	fs.Float64Var(&f.tau, "tau", merge.DefaultTau, "softmax exponent of the probabilistic policy")
	fs.StringVar(&f.credit, "credit", merge.CreditLinear, "credit of the optimized policy: linear or inverse-rank")
	fs.Float64Var(&f.mde, "mde", 0.02, "minimum detectable effect shaping the sequential test")
	fs.Float64Var(&f.alpha, "alpha", 0.05, "significance level of the sequential test")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: riffle simulate [--policy P|all] [--click-model M] [--impressions N] [--queries Q] [--slots K] [--seed S] [--format text|json] [--qrels F --run-a F --run-b F]")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return f, err
		}
		return f, errUsage
	}
	if err := f.check(fs); err != nil {
		return f, err
	}
	policies, err := simulatePolicies(f.policy, merge.Options{Tau: f.tau, Credit: f.credit})
	if err != nil {
		return f, err
	}
	f.cfg = simulate.Config{Policies: policies, ClickModel: f.clickModel, Eta: f.eta,
		Impressions: f.impressions, Runs: f.runs, Queries: f.queries, Slots: f.slots,
		Seed: f.seed, MDE: f.mde, Alpha: f.alpha}
	return f, nil
}

// check validates the parsed flags, naming the first bad one.
func (f *simulateFlags) check(fs *flag.FlagSet) error {
	if fs.NArg() > 0 {
		return fmt.Errorf("unexpected argument %q", fs.Arg(0))
	}
	for _, c := range []struct {
		name string
		v    int
	}{{"impressions", f.impressions}, {"runs", f.runs}, {"queries", f.queries}, {"slots", f.slots}} {
		if c.v <= 0 {
			return fmt.Errorf("--%s %d: want a positive number", c.name, c.v)
		}
	}
	switch {
	case f.format != "text" && f.format != "json":
		return fmt.Errorf("--format %q: want text or json", f.format)
	case !(f.mde > 0 && f.mde < 0.5):
		return fmt.Errorf("--mde %v: want a value in (0, 0.5)", f.mde)
	case !(f.alpha > 0 && f.alpha < 1):
		return fmt.Errorf("--alpha %v: want a level in (0, 1)", f.alpha)
	case (f.qrels == "") != (f.runA == "") || (f.qrels == "") != (f.runB == ""):
		return errors.New("--qrels, --run-a and --run-b go together: give all three or none")
	}
	if _, err := simulate.NewClickModel(f.clickModel, f.eta); err != nil {
		return fmt.Errorf("--click-model: %w", err)
	}
	return nil
}

// simulatePolicies builds the named policy, or every policy for "all".
func simulatePolicies(name string, o merge.Options) ([]merge.Policy, error) {
	names := []string{name}
	if name == "all" {
		names = merge.Names()
	}
	var out []merge.Policy
	for _, n := range names {
		p, err := merge.New(n, o)
		if err != nil {
			return nil, fmt.Errorf("--policy: %w", err)
		}
		out = append(out, p)
	}
	return out, nil
}

// readJudged reads the qrels and the two run files into queries.
func readJudged(qrelsPath, runAPath, runBPath string, slots int) ([]simulate.Query, error) {
	var q simulate.Qrels
	var a, b simulate.Ranking
	err := readSimFile(qrelsPath, func(r io.Reader) (err error) {
		q, err = simulate.ReadQrels(r, qrelsPath)
		return err
	})
	if err == nil {
		err = readSimFile(runAPath, func(r io.Reader) (err error) {
			a, err = simulate.ReadRun(r, runAPath)
			return err
		})
	}
	if err == nil {
		err = readSimFile(runBPath, func(r io.Reader) (err error) {
			b, err = simulate.ReadRun(r, runBPath)
			return err
		})
	}
	if err != nil {
		return nil, err
	}
	return simulate.Judge(q, a, b, slots)
}

// readSimFile opens path and hands it to read.
func readSimFile(path string, read func(io.Reader) error) error {
	fh, err := os.Open(path)
	if err != nil {
		return err
	}
	defer fh.Close()
	return read(fh)
}
