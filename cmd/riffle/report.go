package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"io/fs"
	"slices"
	"strings"
	"time"

	"riffle/merge/verdict"
	"riffle/proxy/config"
	"riffle/store"
	"riffle/store/breakdown"
	"riffle/store/open"
)

// reportFlags are riffle report's settings.
type reportFlags struct {
	Stores     []string
	Experiment string
	Format     string
	Timeout    time.Duration
	Params     verdict.Params
	// Window and Events are the attribution settings --config gave; the
	// store keeps neither.
	Window time.Duration
	Events map[string]float64
}

// storeList is a repeatable --store flag.
type storeList []string

func (s *storeList) String() string { return strings.Join(*s, ",") }

func (s *storeList) Set(v string) error {
	if v == "" {
		return errors.New("empty path")
	}
	*s = append(*s, v)
	return nil
}

// runReport merges the aggregates of one or many store files (one per
// sidecar) and prints the experiment's statistics and verdict: exit 0, 1
// when a store cannot be read, 2 on bad flags.
func runReport(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	f, err := parseReportFlags(args, stderr)
	if err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return 0
		}
		if !errors.Is(err, errUsage) {
			fmt.Fprintf(stderr, "riffle report: %v\n", err)
		}
		return 2
	}
	agg, bd, err := mergeStores(ctx, f.Stores, f.Experiment, f.Timeout)
	if err != nil {
		fmt.Fprintf(stderr, "riffle report: %v\n", err)
		return 1
	}
	st, err := verdict.Compute(agg.Input(f.Params))
	if err != nil {
		fmt.Fprintf(stderr, "riffle report: experiment %q: %v\n", agg.Experiment, err)
		return 1
	}
	fig, err := figuresOf(st, agg, bd, f)
	if err != nil {
		fmt.Fprintf(stderr, "riffle report: experiment %q: %v\n", agg.Experiment, err)
		return 1
	}
	switch f.Format {
	case "json":
		err = writeJSON(stdout, reportBody{Status: st, reportFigures: fig})
	case "html":
		err = writeReportHTML(stdout, st, fig)
	default:
		err = writeReportText(stdout, st, fig)
	}
	if err != nil {
		fmt.Fprintf(stderr, "riffle report: %v\n", err)
		return 1
	}
	return 0
}

func parseReportFlags(args []string, stderr io.Writer) (reportFlags, error) {
	var f reportFlags
	fs := flag.NewFlagSet("riffle report", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Var((*storeList)(&f.Stores), "store", "store file to read (repeat for the stores of several sidecars)")
	fs.StringVar(&f.Experiment, "experiment", "", "experiment to report on (default: the only one in the stores)")
	fs.StringVar(&f.Format, "format", "text", "output format: text, json or html")
	fs.DurationVar(&f.Timeout, "timeout", 0, "how long to wait for a store file's lock; 0 = do not wait")
	fs.Float64Var(&f.Params.Alpha, "alpha", 0.05, "two-sided significance level")
	fs.Float64Var(&f.Params.Power, "power", 0.8, "planned power behind needed")
	fs.Float64Var(&f.Params.MDE, "mde", 0.02, "minimum detectable Delta behind needed")
	fs.Float64Var(&f.Params.Margin, "margin", 0, "non-inferiority and equivalence margin on Delta")
	configPath := fs.String("config", "", "riffle.yaml to take the experiment's name, alpha, power, mde and margin from, so the report matches the live API (flags given win)")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: riffle report --store a.db [--store b.db ...] [--experiment NAME] [--config riffle.yaml] [--format text|json|html]")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return f, err
		}
		return f, errUsage
	}
	if *configPath != "" {
		if err := paramsFromConfig(&f, fs, *configPath); err != nil {
			return f, err
		}
	}
	switch {
	case fs.NArg() > 0:
		return f, fmt.Errorf("unexpected argument %q (give each store with --store)", fs.Arg(0))
	case len(f.Stores) == 0:
		return f, errors.New("--store is required, e.g. --store riffle.db")
	case f.Format != "text" && f.Format != "json" && f.Format != "html":
		return f, fmt.Errorf("--format %q: want text, json or html", f.Format)
	case f.Timeout < 0:
		return f, fmt.Errorf("--timeout %v: want 0 (do not wait) or a positive duration", f.Timeout)
	case !(f.Params.Alpha > 0 && f.Params.Alpha < 1):
		return f, fmt.Errorf("--alpha %v: want a level in (0, 1)", f.Params.Alpha)
	case !(f.Params.Power > 0 && f.Params.Power < 1):
		return f, fmt.Errorf("--power %v: want a probability in (0, 1)", f.Params.Power)
	case !(f.Params.MDE > 0 && f.Params.MDE < 0.5):
		return f, fmt.Errorf("--mde %v: want a Delta in (0, 0.5)", f.Params.MDE)
	case !(f.Params.Margin >= 0 && f.Params.Margin < 0.5):
		return f, fmt.Errorf("--margin %v: want a Delta in [0, 0.5)", f.Params.Margin)
	}
	return f, nil
}

// mergeStores opens every store read-only, picks the experiment and adds
// up its aggregates, and the breakdown of its impressions, over the stores
// that hold it.
func mergeStores(ctx context.Context, paths []string, experiment string, timeout time.Duration) (store.Aggregate, *breakdown.Breakdown, error) {
	var opened []store.ReadCloser
	defer func() {
		for _, s := range opened {
			_ = s.Close()
		}
	}()
	held := map[string][]string{} // experiment -> stores holding it
	seen := map[string]string{}   // instance id -> first store with it
	for _, p := range paths {
		if err := ctx.Err(); err != nil {
			return store.Aggregate{}, nil, err
		}
		s, err := open.ReadOnly(ctx, p, open.Options{Store: store.Options{Timeout: lockWait(timeout)}})
		if err != nil {
			return store.Aggregate{}, nil, openProblem(p, timeout, err)
		}
		opened = append(opened, s)
		if err := notCopy(s, p, seen); err != nil {
			return store.Aggregate{}, nil, err
		}
		names, err := s.Experiments(ctx)
		if err != nil {
			return store.Aggregate{}, nil, fmt.Errorf("%s: %w", p, err)
		}
		for _, n := range names {
			held[n] = append(held[n], p)
		}
	}
	name, err := pickExperiment(held, experiment, paths)
	if err != nil {
		return store.Aggregate{}, nil, err
	}
	var total store.Aggregate
	var holding []store.Reader
	first := true
	for i, s := range opened {
		if !slices.Contains(held[name], paths[i]) {
			continue
		}
		holding = append(holding, s)
		a, err := s.Aggregate(ctx, name)
		if err != nil {
			return store.Aggregate{}, nil, fmt.Errorf("%s: experiment %q: %w", paths[i], name, err)
		}
		if first {
			total, first = a, false // adopt the first: no copy of its users
			continue
		}
		total.Add(a)
	}
	bd, err := readBreakdown(ctx, holding, name)
	if err != nil {
		return store.Aggregate{}, nil, fmt.Errorf("experiment %q: %w", name, err)
	}
	return total, bd, nil
}

// paramsFromConfig takes the experiment's name and statistical settings
// from a config file, except those given as flags.
func paramsFromConfig(f *reportFlags, fs *flag.FlagSet, path string) error {
	cfg, err := config.Load(path)
	if err != nil {
		return fmt.Errorf("--config: %w", err)
	}
	set := map[string]bool{}
	fs.Visit(func(fl *flag.Flag) { set[fl.Name] = true })
	e := cfg.Experiment
	for name, pair := range map[string]struct {
		dst *float64
		v   float64
	}{"alpha": {&f.Params.Alpha, e.Alpha}, "power": {&f.Params.Power, e.Power}, "mde": {&f.Params.MDE, e.MDE}, "margin": {&f.Params.Margin, e.Margin}} {
		if !set[name] {
			*pair.dst = pair.v
		}
	}
	if !set["experiment"] {
		f.Experiment = e.Name
	}
	f.Window, f.Events = e.Window, e.Events
	return nil
}

// notCopy refuses a store that is a copy of one already given (the same
// file twice, or two snapshots of one sidecar), which would count its
// impressions twice.
func notCopy(s store.Reader, path string, seen map[string]string) error {
	id, err := s.Instance()
	if err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	if id == "" {
		return nil // a file from before instance ids: cannot tell
	}
	if first, ok := seen[id]; ok {
		return fmt.Errorf("%s and %s are copies of one sidecar's store (instance %s); give each sidecar's store once, or its impressions count twice", first, path, id)
	}
	seen[id] = path
	return nil
}

// problem is an error whose message says it all in words and that still
// matches its sentinel with errors.Is (whose own text would repeat it).
type problem struct {
	err error
	msg string
}

func (p *problem) Error() string { return p.msg }
func (p *problem) Unwrap() error { return p.err }

// lockWait is the store.Options.Timeout for a --timeout flag: 0 means do
// not wait, which is the shortest positive timeout (the store's 0 means its
// default).
func lockWait(timeout time.Duration) time.Duration {
	return max(timeout, time.Nanosecond)
}

// openProblem says in words why a store file could not be opened, keeping
// the cause for errors.Is.
func openProblem(path string, timeout time.Duration, err error) error {
	switch {
	case errors.Is(err, fs.ErrNotExist):
		return fmt.Errorf("%s: no such store file: %w", path, fs.ErrNotExist)
	case errors.Is(err, store.ErrLocked):
		waited := ""
		if timeout > 0 {
			waited = fmt.Sprintf(" (waited %v)", timeout)
		}
		return &problem{err: store.ErrLocked, msg: fmt.Sprintf(
			"%s: locked by a running riffle%s; use a copy taken from its admin listener's GET /api/v1/snapshot",
			path, waited)}
	case errors.Is(err, store.ErrNotStore):
		return fmt.Errorf("%s: not a riffle store: %w", path, store.ErrNotStore)
	case errors.Is(err, store.ErrSchema):
		return fmt.Errorf("%s: written by another riffle version: %w", path, store.ErrSchema)
	}
	return fmt.Errorf("%s: %w", path, err)
}

// pickExperiment returns the experiment asked for, or the only one the
// stores hold.
func pickExperiment(held map[string][]string, experiment string, paths []string) (string, error) {
	names := make([]string, 0, len(held))
	for n := range held {
		names = append(names, n)
	}
	slices.Sort(names)
	where := strings.Join(paths, ", ")
	switch {
	case experiment != "" && len(held[experiment]) > 0:
		return experiment, nil
	case experiment != "" && len(names) == 0:
		return "", fmt.Errorf("experiment %q: the stores (%s) hold no experiment yet", experiment, where)
	case experiment != "":
		return "", fmt.Errorf("experiment %q is in none of the stores (%s); they hold %s", experiment, where, strings.Join(names, ", "))
	case len(names) == 0:
		return "", fmt.Errorf("the stores (%s) hold no experiment yet", where)
	case len(names) > 1:
		return "", fmt.Errorf("the stores hold several experiments (%s): choose one with --experiment", strings.Join(names, ", "))
	}
	return names[0], nil
}

// writeReportText prints the status for people: a short table and the
// verdict sentence.
func writeReportText(w io.Writer, s verdict.Status, fig reportFigures) error {
	var b strings.Builder
	level := fmt.Sprintf("%g%%", 100*(1-s.Alpha))
	fmt.Fprintf(&b, "riffle report: %s (%s), %s\n\n", s.Experiment, orDash(s.Policy), storesRead(fig.Stores))
	rows := [][2]string{
		{"impressions", fmt.Sprintf("%s served, %s interleaved, %s still inside their window", group(s.Impressions), group(s.Interleaved), group(fig.Open))},
		{"with feedback", fmt.Sprintf("%s (%s finalised without), %s users, design effect %.2f",
			group(s.WithFeedback), group(s.NoFeedback), group(s.Users), s.DesignEffect)},
		{"wins", fmt.Sprintf("challenger %s, incumbent %s, tie %s", group(s.Wins.Challenger), group(s.Wins.Incumbent), group(s.Wins.Tie))},
		{"always-valid", fmt.Sprintf("p = %s, Delta %+.3f in %s, win share in [%.3f, %.3f] (safe to watch live)",
			formatP(s.PValue), s.Delta, formatInterval(s.CSDelta), s.CS[0], s.CS[1])},
		{"fixed-sample", fmt.Sprintf("Delta %s interval %s (clustered by user; one planned look only)", level, formatInterval(s.CI))},
		{"sign test", fmt.Sprintf("p = %s (exact, fixed-sample; %s ties set aside)", formatP(s.SignTest.PValue), group(s.SignTest.TiesSetAside))},
		{"win share", fmt.Sprintf("%.3f, Wilson %s [%.3f, %.3f] (fixed-sample)", s.WinShare, level, s.Wilson[0], s.Wilson[1])},
	}
	if s.Margin > 0 {
		rows = append(rows, [2]string{"margin", fmt.Sprintf("%g, on par or better: %s", s.Margin, yesNo(s.NonInferior))})
	}
	eta := "unknown (no recent traffic)"
	if s.ETA != nil {
		eta = time.Duration(*s.ETA).String()
	}
	rows = append(rows, [2]string{"needed", fmt.Sprintf("%s more impressions with feedback (a fixed-sample test: %s), eta %s",
		group(s.Needed), group(s.NeededFixed), eta)})
	for _, r := range rows {
		fmt.Fprintf(&b, "  %-15s%s\n", r[0], r[1])
	}
	fmt.Fprintf(&b, "\nverdict: %s: %s.\n", s.Verdict, s.Reason)
	writeFiguresText(&b, fig)
	_, err := io.WriteString(w, b.String())
	return err
}

func orDash(s string) string {
	if s == "" {
		return "-"
	}
	return s
}

func yesNo(b bool) string {
	if b {
		return "yes"
	}
	return "no"
}
