// Command riffle-bench measures what riffle costs on the request path. In
// one run it starts two model backends on loopback and loads, interleaved
// in time, three modes: direct (the incumbent backend itself), fanout (a
// bare fan-out proxy built into the bench, the floor for any sidecar that
// must call both models) and riffle (the real sidecar, through the code
// path of `riffle serve`). Each proxy runs in its own child process, so its
// peak RSS can be read and the load generator does not share its heap.
//
// Usage:
//
//	riffle-bench [--duration 40s] [--rate R] [--concurrency 32] [--latency 5ms]
//	             [--rounds 4] [--timeout 200ms] [--profile DIR] [--json]
//
// For each mode it reports the throughput a closed loop of --concurrency
// workers sustains, and the p50, p90, p99 and p99.9 latency and errors of
// an open loop at --rate requests per second (default: half of fanout's
// measured throughput), pooled over --rounds rounds, beside the targets of
// issue 6. Progress goes to stderr, the report to stdout.
//
// The load comes from vegeta (github.com/tsenart/vegeta/v12) in the
// parent process. The backends and the fan-out proxy are safe for
// concurrent use; the run itself is driven from one goroutine, and there
// is no package-level mutable state.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"path/filepath"
	"syscall"
	"time"
)

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	var code int
	if args := os.Args[1:]; len(args) > 0 && args[0] == childFlag {
		code = runChild(ctx, args[1:], os.Stdin, os.Stdout, os.Stderr)
	} else {
		code = run(ctx, args, os.Stdout, os.Stderr)
	}
	stop()
	os.Exit(code)
}

// run runs the bench and returns the exit code: 0 when every mode was
// measured, 1 when one failed (the report still shows the others), 2 on a
// bad command line. A missed target does not change the code.
func run(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	o, err := parseFlags(args, stderr)
	if errors.Is(err, flag.ErrHelp) {
		return 0
	}
	if err != nil {
		fmt.Fprintln(stderr, "riffle-bench:", err)
		return 2
	}
	exe, err := os.Executable()
	if err != nil {
		fmt.Fprintln(stderr, "riffle-bench: find own binary:", err)
		return 1
	}
	r, err := bench(ctx, o, exe, time.Now, stderr)
	if err != nil {
		fmt.Fprintln(stderr, "riffle-bench:", err)
		return 1
	}
	if o.jsonOut {
		err = r.writeJSON(stdout)
	} else {
		err = r.writeTable(stdout)
	}
	if err != nil {
		fmt.Fprintln(stderr, "riffle-bench:", err)
		return 1
	}
	for _, name := range modeNames() {
		if m := r.Modes[name]; m.Error != "" {
			fmt.Fprintf(stderr, "riffle-bench: mode %s failed: %s\n", name, m.Error)
			return 1
		}
	}
	return 0
}

// parseFlags reads the command line into options and checks them.
func parseFlags(args []string, stderr io.Writer) (options, error) {
	var o options
	fs := flag.NewFlagSet("riffle-bench", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.DurationVar(&o.duration, "duration", 40*time.Second, "measuring time over all modes, closed loop then open loop")
	fs.IntVar(&o.rate, "rate", 0, "open-loop rate in requests per second; 0 = half of fanout's measured throughput")
	fs.IntVar(&o.concurrency, "concurrency", 32, "closed-loop workers")
	fs.DurationVar(&o.latency, "latency", 5*time.Millisecond, "backends' fixed latency")
	fs.DurationVar(&o.timeout, "timeout", 200*time.Millisecond, "proxies' per-backend deadline")
	fs.IntVar(&o.rounds, "rounds", 4, "rounds to interleave the modes over")
	fs.StringVar(&o.profile, "profile", "", "write the proxies' CPU and heap profiles (riffle-cpu.pprof, ...) into `DIR`")
	fs.BoolVar(&o.jsonOut, "json", false, "print one JSON object instead of the table")
	if err := fs.Parse(args); err != nil {
		return o, err
	}
	if fs.NArg() > 0 {
		return o, fmt.Errorf("%w: unexpected argument %q", errUsage, fs.Arg(0))
	}
	if err := o.check(); err != nil {
		return o, err
	}
	if o.profile != "" {
		abs, err := filepath.Abs(o.profile)
		if err == nil {
			err = os.MkdirAll(abs, 0o755)
		}
		if err != nil {
			return o, fmt.Errorf("--profile %s: %w", o.profile, err)
		}
		o.profile = abs
	}
	return o, nil
}

// check reports the first option out of range, naming its flag.
func (o options) check() error {
	bad := func(flag, why string, v any) error {
		return fmt.Errorf("%w: --%s %v: %s", errUsage, flag, v, why)
	}
	switch {
	case o.duration < 300*time.Millisecond || o.duration > time.Hour:
		return bad("duration", "want 300ms to 1h", o.duration)
	case o.rate < 0 || o.rate > 1_000_000:
		return bad("rate", "want 0 (automatic) to 1000000", o.rate)
	case o.concurrency < 1 || o.concurrency > 4096:
		return bad("concurrency", "want 1 to 4096", o.concurrency)
	case o.latency < 0 || o.latency > 10*time.Second:
		return bad("latency", "want 0 to 10s", o.latency)
	case o.timeout <= o.latency:
		return bad("timeout", "must exceed --latency "+o.latency.String(), o.timeout)
	case o.rounds < 1 || o.rounds > 100:
		return bad("rounds", "want 1 to 100", o.rounds)
	}
	return nil
}
