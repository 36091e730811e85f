package main

import (
	"context"
	"fmt"
	"io"
)

func runPlan(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fmt.Fprintln(stderr, "riffle plan: not built yet")
	return 1
}
