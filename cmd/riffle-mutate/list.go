package main

import (
	"bufio"
	"fmt"
	"io"
	"path"
	"strconv"
	"strings"
)

// Mutation is one small, plausible bug: replace Old by New in File (both
// exact text; Old must occur exactly once) and run the tests of Packages,
// which should then fail.
type Mutation struct {
	Name     string
	File     string   // slash-separated, relative to the module root
	Packages []string // go test patterns, e.g. ./store
	Old, New string
	Why      string // the bug it stands for
	// Equivalent, when set, says why the mutant cannot be told apart from
	// the right code by any test; it is then expected to survive.
	Equivalent string
	Line       int // where the record starts in the list file
}

// fields are the keys of a record, in the order the list file uses them.
var fields = []string{"name", "package", "file", "old", "new", "why", "equivalent"}

// ParseList reads a mutation list: records of "key: value" lines separated
// by blank lines, '#' starting a comment line. A value is taken verbatim
// after the colon and the spaces that follow it, unless the whole value is
// a Go string literal (for tabs, newlines or leading spaces), which is
// decoded; to give a Go literal verbatim, quote it once more. name, package, file and old are required; new may be
// empty (a deletion). Errors name the file's line.
func ParseList(r io.Reader, src string) ([]Mutation, error) {
	var out []Mutation
	var cur map[string]string
	start := 0
	flush := func() error {
		if cur == nil {
			return nil
		}
		m, err := fromRecord(cur, start)
		if err != nil {
			return fmt.Errorf("%s:%d: %w", src, start, err)
		}
		out = append(out, m)
		cur = nil
		return nil
	}
	sc := bufio.NewScanner(r)
	for n := 1; sc.Scan(); n++ {
		line := sc.Text()
		switch trimmed := strings.TrimSpace(line); {
		case trimmed == "":
			if err := flush(); err != nil {
				return nil, err
			}
			continue
		case strings.HasPrefix(trimmed, "#"):
			continue
		}
		key, val, ok := strings.Cut(line, ":")
		if !ok || !known(key) {
			return nil, fmt.Errorf("%s:%d: want \"key: value\" with a key of %s, got %q", src, n, strings.Join(fields, ", "), line)
		}
		val = value(strings.TrimLeft(val, " \t"))
		if cur == nil {
			cur, start = map[string]string{}, n
		}
		if _, dup := cur[key]; dup {
			return nil, fmt.Errorf("%s:%d: %s given twice in one record", src, n, key)
		}
		cur[key] = val
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("%s: %w", src, err)
	}
	if err := flush(); err != nil {
		return nil, err
	}
	return out, unique(out, src)
}

func known(key string) bool {
	for _, f := range fields {
		if f == key {
			return true
		}
	}
	return false
}

// value decodes a value that is a whole Go string literal; others are
// verbatim.
func value(v string) string {
	if strings.HasPrefix(v, `"`) {
		if s, err := strconv.Unquote(v); err == nil {
			return s
		}
	}
	return v
}

func fromRecord(r map[string]string, line int) (Mutation, error) {
	for _, k := range []string{"name", "package", "file", "old"} {
		if r[k] == "" {
			return Mutation{}, fmt.Errorf("record has no %s", k)
		}
	}
	m := Mutation{
		Name: r["name"], File: r["file"], Packages: strings.Fields(r["package"]),
		Old: r["old"], New: r["new"], Why: r["why"], Equivalent: r["equivalent"], Line: line,
	}
	if m.Old == m.New {
		return Mutation{}, fmt.Errorf("mutation %s: old and new are the same text", m.Name)
	}
	if path.IsAbs(m.File) || strings.HasPrefix(path.Clean(m.File), "..") {
		return Mutation{}, fmt.Errorf("mutation %s: file %q must be relative to the module root", m.Name, m.File)
	}
	for _, p := range m.Packages {
		if !strings.HasPrefix(p, "./") {
			return Mutation{}, fmt.Errorf("mutation %s: package %q: want a relative pattern such as ./store", m.Name, p)
		}
	}
	return m, nil
}

func unique(ms []Mutation, src string) error {
	seen := map[string]int{}
	for _, m := range ms {
		if at, dup := seen[m.Name]; dup {
			return fmt.Errorf("%s:%d: mutation name %s already used at line %d", src, m.Line, m.Name, at)
		}
		seen[m.Name] = m.Line
	}
	return nil
}
