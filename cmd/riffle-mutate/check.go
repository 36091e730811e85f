package main

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"time"
)

// Verdict is what became of one mutation.
type Verdict string

// The outcomes of a mutation.
const (
	Killed   Verdict = "killed"   // a test failed: the suite notices the bug
	Survived Verdict = "survived" // every test passed: a gap, unless equivalent
	Broken   Verdict = "broken"   // the mutant does not build: fix the list
	Stale    Verdict = "stale"    // old text not found exactly once: fix the list
)

// Result is one mutation's outcome.
type Result struct {
	Mutation Mutation
	Verdict  Verdict
	// Failed names the tests that failed (killed), or says what is wrong
	// (broken, stale).
	Failed []string
	Took   time.Duration
}

// checker runs mutations one at a time in a private copy of a module.
type checker struct {
	goBin   string
	dir     string // the copy
	timeout time.Duration
}

// copyModule copies the module at root (without .git) into a new
// directory under tmp and returns it.
func copyModule(root, tmp string) (string, error) {
	dst, err := os.MkdirTemp(tmp, "riffle-mutate-")
	if err != nil {
		return "", fmt.Errorf("copy module: %w", err)
	}
	err = filepath.WalkDir(root, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, err := filepath.Rel(root, p)
		if err != nil {
			return err
		}
		if d.IsDir() {
			if d.Name() == ".git" && rel != "." {
				return filepath.SkipDir
			}
			return os.MkdirAll(filepath.Join(dst, rel), 0o755)
		}
		if !d.Type().IsRegular() {
			return nil // sockets, symlinks: not part of a build
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		return os.WriteFile(filepath.Join(dst, rel), b, 0o644)
	})
	if err != nil {
		os.RemoveAll(dst)
		return "", fmt.Errorf("copy module %s: %w", root, err)
	}
	return dst, nil
}

// test runs go test -short on pkgs in the copy and returns whether it
// passed, the failed tests' names, and whether the failure was a build
// failure.
func (c *checker) test(ctx context.Context, pkgs []string) (ok bool, failed []string, broken bool, err error) {
	ctx, cancel := context.WithTimeout(ctx, c.timeout+time.Minute)
	defer cancel()
	args := append([]string{"test", "-short", "-count=1", "-timeout", c.timeout.String()}, pkgs...)
	cmd := exec.CommandContext(ctx, c.goBin, args...)
	cmd.Dir = c.dir
	var out bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &out
	runErr := cmd.Run()
	if ctx.Err() != nil {
		return false, []string{"(go test did not return within " + (c.timeout + time.Minute).String() + ")"}, false, nil
	}
	var exit *exec.ExitError
	if runErr != nil && !errors.As(runErr, &exit) {
		return false, nil, false, fmt.Errorf("go test %s: %w", strings.Join(pkgs, " "), runErr)
	}
	if runErr == nil {
		return true, nil, false, nil
	}
	return false, failures(out.String()), buildFailed(out.String()), nil
}

var (
	failLine  = regexp.MustCompile(`(?m)^\s*--- FAIL: (\S+)`)
	panicLine = regexp.MustCompile(`(?m)^panic: .*$`)
	timedOut  = regexp.MustCompile(`(?m)^panic: test timed out after .*$`)
	buildFail = regexp.MustCompile(`(?m)\[(build failed|setup failed)\]$`)
)

// failures returns the names of the failed tests in go test's output, or
// the panic or last lines when no test is named.
func failures(out string) []string {
	var names []string
	for _, m := range failLine.FindAllStringSubmatch(out, -1) {
		top, _, _ := strings.Cut(m[1], "/") // a subtest fails its parent too
		if !slices.Contains(names, top) {
			names = append(names, top)
		}
	}
	if len(names) > 0 {
		return names
	}
	for _, re := range []*regexp.Regexp{timedOut, panicLine} {
		if m := re.FindString(out); m != "" {
			return []string{m}
		}
	}
	lines := strings.Split(strings.TrimSpace(out), "\n")
	return lines[max(0, len(lines)-3):]
}

func buildFailed(out string) bool { return buildFail.MatchString(out) }

// apply writes m into the copy and returns a function that restores the
// file, or a reason the mutation does not apply.
func (c *checker) apply(m Mutation) (restore func() error, stale string, err error) {
	p := filepath.Join(c.dir, filepath.FromSlash(m.File))
	orig, err := os.ReadFile(p)
	if errors.Is(err, fs.ErrNotExist) {
		return nil, "file " + m.File + " does not exist", nil
	}
	if err != nil {
		return nil, "", fmt.Errorf("mutation %s: %w", m.Name, err)
	}
	if n := bytes.Count(orig, []byte(m.Old)); n != 1 {
		return nil, fmt.Sprintf("old text found %d times in %s, want exactly once", n, m.File), nil
	}
	mutant := bytes.Replace(orig, []byte(m.Old), []byte(m.New), 1)
	if err := os.WriteFile(p, mutant, 0o644); err != nil {
		return nil, "", fmt.Errorf("mutation %s: %w", m.Name, err)
	}
	return func() error { return os.WriteFile(p, orig, 0o644) }, "", nil
}

// run applies m, tests its packages and restores the file.
func (c *checker) run(ctx context.Context, m Mutation) (Result, error) {
	start := time.Now()
	r := Result{Mutation: m}
	restore, stale, err := c.apply(m)
	if err != nil {
		return r, err
	}
	if stale != "" {
		r.Verdict, r.Failed = Stale, []string{stale}
		return r, nil
	}
	ok, failed, broken, err := c.test(ctx, m.Packages)
	if rerr := restore(); err == nil && rerr != nil {
		err = fmt.Errorf("mutation %s: restore %s: %w", m.Name, m.File, rerr)
	}
	r.Took = time.Since(start)
	switch {
	case ok:
		r.Verdict = Survived
	case broken:
		r.Verdict, r.Failed = Broken, failed
	default:
		r.Verdict, r.Failed = Killed, failed
	}
	return r, err
}
