package main

import (
	"context"
	"fmt"
	"io"
)

func runExport(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	fmt.Fprintln(stderr, "riffle export: not built yet")
	return 1
}
