// Command riffle-mutate is riffle's mutation check: it makes small,
// plausible bugs in the code one at a time and runs the tests of the
// package that owns the code, to show which bugs the tests would let
// through.
//
// Usage:
//
//	go run ./cmd/riffle-mutate [-list testdata/mutations.txt] [-run REGEXP]
//	                           [-timeout 3m] [-module DIR]
//
// The list (see ParseList for its format) names each mutation, the file,
// the exact text to replace and its replacement, and the packages whose
// tests should catch it. riffle-mutate copies the module to a temporary
// directory (the working tree is never touched), checks that those
// packages' tests pass unmutated, then for each mutation writes it into
// the copy, runs `go test -short -count=1` on its packages and restores
// the file. It prints one line per mutation: killed (with the tests that
// failed), survived, broken (the mutant does not build) or stale (the old
// text is not in the file exactly once), and exits 1 if any mutation
// survived without being marked equivalent, or is broken or stale.
//
// It runs the mutations one after another, so a full list takes minutes;
// it is not part of CI.
package main

import (
	"context"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"syscall"
)

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	code := run(ctx, os.Args[1:], os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

// run is main without the process: it returns the exit code.
func run(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fl := flag.NewFlagSet("riffle-mutate", flag.ContinueOnError)
	fl.SetOutput(stderr)
	var o options
	fl.StringVar(&o.list, "list", "testdata/mutations.txt", "the mutation list, relative to the module root unless absolute")
	fl.StringVar(&o.only, "run", "", "run only the mutations whose name matches this regular expression")
	fl.DurationVar(&o.timeout, "timeout", defaultTimeout, "go test -timeout for each run")
	fl.StringVar(&o.module, "module", "", "the module root (default: the nearest directory up from here with a go.mod)")
	fl.StringVar(&o.goBin, "go", "go", "the go command")
	if err := fl.Parse(args); err != nil {
		return 2
	}
	if fl.NArg() > 0 {
		fmt.Fprintf(stderr, "riffle-mutate: unexpected arguments %q\n", fl.Args())
		return 2
	}
	results, err := o.check(ctx, stderr)
	if err != nil {
		fmt.Fprintf(stderr, "riffle-mutate: %v\n", err)
		return 2
	}
	if !report(stdout, results) {
		return 1
	}
	return 0
}
