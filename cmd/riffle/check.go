package main

import (
	"context"
	"fmt"
	"io"
)

func runCheck(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fmt.Fprintln(stderr, "riffle check: not built yet")
	return 1
}
