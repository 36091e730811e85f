package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"time"

	"riffle/store"
	"riffle/store/open"
)

// runExport writes every impression of a store file, with its slots,
// events and outcome, as NDJSON on stdout (see store.(*Store).Export). It
// opens the file read-only, so it waits at most --timeout for a live
// sidecar's lock (default: not at all) and then says the file is locked. Exit 0 on success, 1 when
// the store cannot be read, 2 on bad flags.
func runExport(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fs := flag.NewFlagSet("riffle export", flag.ContinueOnError)
	fs.SetOutput(stderr)
	path := fs.String("store", "", "store file to export (required)")
	since := fs.String("since", "", "only impressions served at or after this RFC 3339 time, or this long ago (e.g. 24h)")
	timeout := fs.Duration("timeout", 0, "how long to wait for the file's lock; 0 = do not wait")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: riffle export --store riffle.db [--since TIME]")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return 0
		}
		return 2
	}
	if fs.NArg() > 0 || *path == "" {
		if *path == "" {
			fmt.Fprintln(stderr, "riffle export: --store is required")
		} else {
			fmt.Fprintf(stderr, "riffle export: unexpected argument %q\n", fs.Arg(0))
		}
		fs.Usage()
		return 2
	}
	from, err := parseSince(*since, time.Now())
	if err != nil {
		fmt.Fprintf(stderr, "riffle export: --since: %v\n", err)
		return 2
	}
	st, err := open.ReadOnly(ctx, *path, open.Options{Store: store.Options{Timeout: lockWait(*timeout)}})
	if err != nil {
		fmt.Fprintf(stderr, "riffle export: %v\n", openProblem(*path, *timeout, err))
		return 1
	}
	defer st.Close()
	if err := st.Export(ctx, stdout, from); err != nil {
		fmt.Fprintf(stderr, "riffle export: %v\n", err)
		return 1
	}
	return 0
}

// parseSince reads --since: empty (everything), an RFC 3339 time, or a
// positive Go duration counted back from now.
func parseSince(s string, now time.Time) (time.Time, error) {
	if s == "" {
		return time.Time{}, nil
	}
	if t, err := time.Parse(time.RFC3339Nano, s); err == nil {
		return t, nil
	}
	d, err := time.ParseDuration(s)
	if err != nil || d <= 0 {
		return time.Time{}, fmt.Errorf("%q is neither an RFC 3339 time (2026-04-01T00:00:00Z) nor a positive duration (24h)", s)
	}
	return now.Add(-d), nil
}
