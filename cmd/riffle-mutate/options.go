package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"time"
)

// defaultTimeout bounds one package's test run; the slowest -short
// package takes well under a minute on 2 cores, so a run that takes three
// is a mutant that hangs (common practice: generous slack).
const defaultTimeout = 3 * time.Minute

type options struct {
	list, only, module, goBin string
	timeout                   time.Duration
}

// check loads the list, copies the module, runs the baseline and every
// selected mutation, and returns the results in list order.
func (o *options) check(ctx context.Context, progress io.Writer) ([]Result, error) {
	root, err := moduleRoot(o.module)
	if err != nil {
		return nil, err
	}
	ms, err := o.load(root)
	if err != nil {
		return nil, err
	}
	dir, err := copyModule(root, os.TempDir())
	if err != nil {
		return nil, err
	}
	defer os.RemoveAll(dir)
	c := &checker{goBin: o.goBin, dir: dir, timeout: o.timeout}
	var pkgs []string
	for _, m := range ms {
		for _, p := range m.Packages {
			if !slices.Contains(pkgs, p) {
				pkgs = append(pkgs, p)
			}
		}
	}
	fmt.Fprintf(progress, "riffle-mutate: %d mutations over %s; baseline run of %s\n", len(ms), root, strings.Join(pkgs, " "))
	ok, failed, _, err := c.test(ctx, pkgs)
	if err != nil {
		return nil, err
	}
	if !ok {
		return nil, fmt.Errorf("the unmutated tests fail (%s): fix them before checking mutations", strings.Join(failed, ", "))
	}
	var results []Result
	for i, m := range ms {
		r, err := c.run(ctx, m)
		if err != nil {
			return results, err
		}
		if ctx.Err() != nil {
			return results, ctx.Err()
		}
		fmt.Fprintf(progress, "riffle-mutate: %d/%d %s: %s (%.1fs)\n", i+1, len(ms), m.Name, r.Verdict, r.Took.Seconds())
		results = append(results, r)
	}
	return results, nil
}

// load parses the list and keeps the mutations -run selects.
func (o *options) load(root string) ([]Mutation, error) {
	path := o.list
	if !filepath.IsAbs(path) {
		path = filepath.Join(root, path)
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("mutation list: %w", err)
	}
	defer f.Close()
	ms, err := ParseList(f, path)
	if err != nil {
		return nil, err
	}
	if o.only != "" {
		re, err := regexp.Compile(o.only)
		if err != nil {
			return nil, fmt.Errorf("-run: %w", err)
		}
		ms = slices.DeleteFunc(ms, func(m Mutation) bool { return !re.MatchString(m.Name) })
	}
	if len(ms) == 0 {
		return nil, fmt.Errorf("%s: no mutation selected", path)
	}
	return ms, nil
}

// moduleRoot returns dir, or the nearest directory up from the working
// directory holding a go.mod.
func moduleRoot(dir string) (string, error) {
	if dir != "" {
		if _, err := os.Stat(filepath.Join(dir, "go.mod")); err != nil {
			return "", fmt.Errorf("-module %s: %w", dir, err)
		}
		return filepath.Abs(dir)
	}
	d, err := os.Getwd()
	if err != nil {
		return "", err
	}
	for {
		if _, err := os.Stat(filepath.Join(d, "go.mod")); err == nil {
			return d, nil
		} else if !errors.Is(err, os.ErrNotExist) {
			return "", err
		}
		up := filepath.Dir(d)
		if up == d {
			return "", errors.New("no go.mod here or above; give -module")
		}
		d = up
	}
}
