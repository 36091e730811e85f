package config

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// minimal is testdata/minimal.yaml: the least a valid config needs.
func minimal(t testing.TB) []byte {
	t.Helper()
	data, err := os.ReadFile(filepath.Join("testdata", "minimal.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	return data
}

// parseOK parses src and fails the test on any problem.
func parseOK(t testing.TB, src string) *Config {
	t.Helper()
	c, err := Parse([]byte(src), "test.yaml")
	if err != nil {
		t.Fatalf("Parse: unexpected error:\n%v", err)
	}
	return c
}

// problemsOf returns the problems of an *Error, failing the test for any
// other error.
func problemsOf(t testing.TB, err error) []Problem {
	t.Helper()
	if err == nil {
		t.Fatal("got no error, want problems")
	}
	var ce *Error
	if !errors.As(err, &ce) {
		t.Fatalf("got %T %v, want *config.Error", err, err)
	}
	return ce.Problems
}

// writeFile writes content to path, failing the test on error.
func writeFile(t testing.TB, path, content string) {
	t.Helper()
	if err := os.WriteFile(path, []byte(content), 0o644); err != nil {
		t.Fatal(err)
	}
}

func strs(ps []Problem) string {
	var b strings.Builder
	for _, p := range ps {
		b.WriteString("\n\t" + p.String())
	}
	return b.String()
}
