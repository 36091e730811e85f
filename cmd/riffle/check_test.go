package main

import (
	"bytes"
	"context"
	"flag"
	"os"
	"path/filepath"
	"strconv"
	"testing"
)

// The -update flag rewrites golden files. It is defined only if no other
// test file of this package has defined it, so that several files can share
// one flag.
func init() {
	if flag.Lookup("update") == nil {
		flag.Bool("update", false, "rewrite golden files in testdata")
	}
}

func updateGolden() bool {
	f := flag.Lookup("update")
	v, _ := strconv.ParseBool(f.Value.String())
	return v
}

// TestCheckGolden runs riffle check on the config fixtures and compares its
// exit code and output with testdata/check/<name>.golden.
func TestCheckGolden(t *testing.T) {
	fixtures := filepath.Join("..", "..", "proxy", "config", "testdata")
	tests := []struct {
		name string
		args []string
		code int
	}{
		{"minimal", []string{"--config", filepath.Join(fixtures, "minimal.yaml")}, 0},
		{"deploy-example", []string{"--config", filepath.Join("..", "..", "deploy", "riffle.yaml")}, 0},
		{"bad-many", []string{"--config", filepath.Join(fixtures, "bad-many.yaml")}, 1},
		{"bad-unknown", []string{"--config", filepath.Join(fixtures, "bad-unknown.yaml")}, 1},
		{"bad-types", []string{"--config", filepath.Join(fixtures, "bad-types.yaml")}, 1},
		{"bad-yaml", []string{"--config", filepath.Join(fixtures, "bad-yaml.yaml")}, 1},
		{"bad-duplicate", []string{"--config", filepath.Join(fixtures, "bad-duplicate.yaml")}, 1},
		{"missing-file", []string{"--config", filepath.Join(fixtures, "absent.yaml")}, 1},
		{"stray-argument", []string{"--config", "a.yaml", "b.yaml"}, 2},
		{"bad-flag", []string{"--konfig", "a.yaml"}, 2},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var stdout, stderr bytes.Buffer
			code := run(context.Background(), append([]string{"check"}, tt.args...), &stdout, &stderr)
			if code != tt.code {
				t.Errorf("exit code: got %d, want %d\nstderr:\n%s", code, tt.code, stderr.String())
			}
			got := []byte("-- stdout --\n" + stdout.String() + "-- stderr --\n" + stderr.String())
			golden := filepath.Join("testdata", "check", tt.name+".golden")
			if updateGolden() {
				if err := os.MkdirAll(filepath.Dir(golden), 0o755); err != nil {
					t.Fatal(err)
				}
				if err := os.WriteFile(golden, got, 0o644); err != nil {
					t.Fatal(err)
				}
				return
			}
			want, err := os.ReadFile(golden)
			if err != nil {
				t.Fatalf("%v (run go test -run TestCheckGolden -update to create it)", err)
			}
			if !bytes.Equal(got, want) {
				t.Errorf("output differs from %s\n got:\n%s\nwant:\n%s", golden, got, want)
			}
		})
	}
}
