package main

import (
	"context"
	"fmt"
	"io"
)

func runReport(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fmt.Fprintln(stderr, "riffle report: not built yet")
	return 1
}
