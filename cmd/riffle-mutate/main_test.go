package main

import (
	"bytes"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

// TestRunOnFixture runs the check on testdata/fixture, a module of two
// tiny functions whose list holds one mutation of each kind: Max inverted
// (its test fails: killed), Max's > made >= (the same for ints: declared
// equivalent), Abs made the identity (no test: survived), a mutant that
// does not compile (broken) and one naming absent code (stale).
func TestRunOnFixture(t *testing.T) {
	if testing.Short() {
		t.Skip("runs go test five times on the fixture; skipped with -short")
	}
	fixture, err := filepath.Abs(filepath.Join("testdata", "fixture"))
	if err != nil {
		t.Fatal(err)
	}
	src := filepath.Join(fixture, "calc", "calc.go")
	before, err := os.ReadFile(src)
	if err != nil {
		t.Fatal(err)
	}
	var out, progress bytes.Buffer
	code := run(t.Context(), []string{"-module", fixture, "-list", "mutations.txt", "-timeout", "1m"}, &out, &progress)
	if code != 1 {
		t.Errorf("exit code %d, want 1 (a survivor, a broken and a stale mutation); progress:\n%s", code, progress.String())
	}
	for _, want := range []string{
		`(?m)^killed\s+max-inverted\s+\./calc\s+TestMax$`,
		`(?m)^equivalent\s+max-ties\s+\./calc\s+on a tie a and b are the same int$`,
		`(?m)^survived\s+abs-identity\s+\./calc\s+Abs of a negative stays negative$`,
		`(?m)^broken\s+max-syntax\s+\./calc\s+.*calc\.go`,
		`(?m)^stale\s+gone\s+\./calc\s+old text found 0 times in calc/calc.go, want exactly once$`,
		`(?m)^5 mutations: 1 killed, 1 survived, 1 equivalent, 1 broken, 1 stale$`,
	} {
		if !regexp.MustCompile(want).MatchString(out.String()) {
			t.Errorf("report lacks %s:\n%s", want, out.String())
		}
	}
	if after, err := os.ReadFile(src); err != nil || !bytes.Equal(after, before) {
		t.Errorf("the fixture's source changed (%v): riffle-mutate must work on a copy", err)
	}
	out.Reset()
	if code := run(t.Context(), []string{"-module", fixture, "-list", "mutations.txt", "-run", "^max-(inverted|ties)$"}, &out, &progress); code != 0 {
		t.Errorf("only the killed and the equivalent mutation: exit code %d, want 0:\n%s", code, out.String())
	}
}

// TestBaselineMustPass: a module whose tests fail unmutated is refused,
// since every mutation would look killed.
func TestBaselineMustPass(t *testing.T) {
	if testing.Short() {
		t.Skip("runs go test on a copy of the fixture; skipped with -short")
	}
	dir := t.TempDir()
	copied, err := copyModule(filepath.Join("testdata", "fixture"), dir)
	if err != nil {
		t.Fatal(err)
	}
	test := filepath.Join(copied, "calc", "calc_test.go")
	b, err := os.ReadFile(test)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(test, bytes.Replace(b, []byte("{1, 2, 2}"), []byte("{1, 2, 1}"), 1), 0o644); err != nil {
		t.Fatal(err)
	}
	var out, progress bytes.Buffer
	if code := run(t.Context(), []string{"-module", copied, "-list", "mutations.txt"}, &out, &progress); code != 2 {
		t.Errorf("exit code %d, want 2", code)
	}
	if !strings.Contains(progress.String(), "the unmutated tests fail (TestMax)") {
		t.Errorf("progress does not say the baseline failed:\n%s", progress.String())
	}
}

func TestUsageErrors(t *testing.T) {
	for _, args := range [][]string{{"-no-such-flag"}, {"extra"}, {"-module", t.TempDir()}} {
		var out, errb bytes.Buffer
		if code := run(t.Context(), args, &out, &errb); code != 2 || errb.Len() == 0 {
			t.Errorf("run(%q) = %d, stderr %q; want 2 and a message", args, code, errb.String())
		}
	}
}
