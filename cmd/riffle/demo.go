package main

import (
	"context"
	"fmt"
	"io"
)

func runDemo(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fmt.Fprintln(stderr, "riffle demo: not built yet")
	return 1
}
