package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"

	"riffle/proxy/config"
)

// runCheck validates a config file: exit 0 with "ok: <path> (hash <h>)" on
// stdout when it is valid, exit 1 with every problem on stderr, one per line
// as "<path>:<line>: <key>: <message>", when it is not, and exit 2 on bad
// flags.
func runCheck(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("riffle check", flag.ContinueOnError)
	fs.SetOutput(stderr)
	path := fs.String("config", "riffle.yaml", "config file to validate")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: riffle check [--config riffle.yaml]")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return 0
		}
		return 2
	}
	if fs.NArg() > 0 {
		fmt.Fprintf(stderr, "riffle check: unexpected argument %q\n", fs.Arg(0))
		fs.Usage()
		return 2
	}
	c, err := config.Load(*path)
	if err != nil {
		var ce *config.Error
		if !errors.As(err, &ce) {
			fmt.Fprintf(stderr, "riffle check: %v\n", err)
			return 1
		}
		for _, line := range ce.Lines() {
			fmt.Fprintln(stderr, line)
		}
		return 1
	}
	fmt.Fprintf(stdout, "ok: %s (hash %s)\n", *path, c.Hash())
	return 0
}
