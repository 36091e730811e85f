package main

import (
	"context"
	"fmt"
	"io"
)

func runSimulate(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fmt.Fprintln(stderr, "riffle simulate: not built yet")
	return 1
}
