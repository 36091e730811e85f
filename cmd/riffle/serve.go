package main

import (
	"context"
	"fmt"
	"io"
)

func runServe(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fmt.Fprintln(stderr, "riffle serve: not built yet")
	return 1
}
