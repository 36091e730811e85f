package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"

	"riffle/proxy/config"
	"riffle/proxy/sidecar"
)

// runServe runs the sidecar until SIGTERM or SIGINT, then shuts down
// gracefully; SIGHUP reloads the config.
func runServe(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("riffle serve", flag.ContinueOnError)
	fs.SetOutput(stderr)
	path := fs.String("config", "riffle.yaml", "config file")
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return 0
		}
		return 2
	}
	if fs.NArg() > 0 {
		fmt.Fprintf(stderr, "riffle serve: unexpected argument %q\n", fs.Arg(0))
		return 2
	}
	if err := sidecar.ServeSignals(ctx, *path, stderr, hangups(ctx)); err != nil {
		printError(stderr, "riffle serve", err)
		return 1
	}
	return 0
}

// printError prints err, one config problem per line when it is a config
// error.
func printError(w io.Writer, prefix string, err error) {
	var ce *config.Error
	if errors.As(err, &ce) {
		fmt.Fprintf(w, "%s: invalid config:\n", prefix)
		for _, line := range ce.Lines() {
			fmt.Fprintln(w, "  "+line)
		}
		return
	}
	fmt.Fprintf(w, "%s: %v\n", prefix, err)
}
