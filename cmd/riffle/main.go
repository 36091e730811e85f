// Command riffle is an HTTP sidecar that interleaves an incumbent and a
// challenger recommendation model's ranked lists on live traffic, records
// which model supplied every slot, joins feedback to slots and says whether
// the challenger wins, is on par, or loses.
package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"os/signal"
	"syscall"

	"riffle/cmd/riffle/internal/hangup"
)

// command is one subcommand: it parses its own flags from args.
type command struct {
	run     func(ctx context.Context, args []string, stdout, stderr io.Writer) int
	summary string
}

func commands() map[string]command {
	return map[string]command{
		"serve":    {runServe, "run the sidecar: riffle serve --config riffle.yaml"},
		"check":    {runCheck, "validate a config file: riffle check --config riffle.yaml"},
		"demo":     {runDemo, "run a whole experiment on loopback with embedded backends"},
		"report":   {runReport, "report on one or many store files"},
		"export":   {runExport, "export impressions, events and outcomes as NDJSON"},
		"plan":     {runPlan, "sample size and duration before starting"},
		"simulate": {runSimulate, "compare interleaving policies under click models"},
	}
}

func main() {
	// SIGHUP was subscribed while the process initialised (package
	// hangup); serve reloads on it, the other commands keep its default.
	ctx := context.Background()
	if len(os.Args) > 1 && os.Args[1] == "serve" {
		ctx = withHangups(ctx, hangup.Signals())
	} else {
		hangup.Release()
	}
	ctx, stop := signal.NotifyContext(ctx, os.Interrupt, syscall.SIGTERM)
	code := run(ctx, os.Args[1:], os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

// hangupsKey is the context key under which main passes the SIGHUP channel
// it subscribed before anything else.
type hangupsKey struct{}

// withHangups returns ctx carrying hup for runServe.
func withHangups(ctx context.Context, hup <-chan os.Signal) context.Context {
	return context.WithValue(ctx, hangupsKey{}, hup)
}

// hangups returns the SIGHUP channel main subscribed, or nil.
func hangups(ctx context.Context) <-chan os.Signal {
	hup, _ := ctx.Value(hangupsKey{}).(<-chan os.Signal)
	return hup
}

// run dispatches to a subcommand and returns the process exit code.
func run(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	cmds := commands()
	if len(args) == 0 || args[0] == "-h" || args[0] == "--help" || args[0] == "help" {
		usage(stderr, cmds)
		if len(args) == 0 {
			return 2
		}
		return 0
	}
	c, ok := cmds[args[0]]
	if !ok {
		fmt.Fprintf(stderr, "riffle: unknown command %q\n", args[0])
		usage(stderr, cmds)
		return 2
	}
	return c.run(ctx, args[1:], stdout, stderr)
}

func usage(w io.Writer, cmds map[string]command) {
	fmt.Fprintln(w, "usage: riffle <command> [flags]")
	for _, name := range []string{"serve", "check", "demo", "report", "export", "plan", "simulate"} {
		fmt.Fprintf(w, "  %-9s %s\n", name, cmds[name].summary)
	}
}
