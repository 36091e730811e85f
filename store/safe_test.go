package store

import (
	"context"
	"errors"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// snapshotOf writes a snapshot of st to a new file and returns its path.
func snapshotOf(t *testing.T, st *Store) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), "snap.db")
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := st.Snapshot(f); err != nil {
		t.Fatal(err)
	}
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
	return path
}

func TestInstanceSurvivesSnapshots(t *testing.T) {
	st, _ := openTest(t, testOptions(newClock(t0)))
	recordAll(t, st, teamDraftImpression(t0, 1, 5))
	live, err := st.Instance()
	if err != nil || len(live) != 16 {
		t.Fatalf("Instance() = %q, %v; want 16 hex digits", live, err)
	}
	cp, err := Open(snapshotOf(t, st), &Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer cp.Close()
	if got, _ := cp.Instance(); got != live {
		t.Errorf("snapshot instance %q, live %q: a snapshot must keep its sidecar's id", got, live)
	}
	other, _ := openTest(t, testOptions(newClock(t0)))
	if id, _ := other.Instance(); id == live {
		t.Errorf("two new stores share instance %q", id)
	}
}

// TestDamagedFilesGiveErrors checks that a truncated or empty file (an
// interrupted snapshot download, say) gives an error naming the file, not
// a panic inside bbolt.
func TestDamagedFilesGiveErrors(t *testing.T) {
	st, _ := openTest(t, testOptions(newClock(t0)))
	for i := range 3000 {
		st.Record(teamDraftImpression(t0.Add(time.Duration(i)*time.Second), uint64(i), uint64(i%97)))
	}
	snap := snapshotOf(t, st)
	full, err := os.ReadFile(snap)
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	cases := []struct {
		name string
		data []byte
		want error
	}{
		{"empty", nil, ErrNotStore},
		{"header-only", full[:4096], nil},
		{"half", full[:len(full)/2], nil},
		{"garbage", []byte("compost and worm castings, not a store"), ErrNotStore},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			path := filepath.Join(dir, c.name+".db")
			if err := os.WriteFile(path, c.data, 0o600); err != nil {
				t.Fatal(err)
			}
			err := readAll(path)
			if err == nil {
				t.Fatalf("reading a %s file succeeded", c.name)
			}
			if c.want != nil && !errors.Is(err, c.want) {
				t.Errorf("error %v, want it to wrap %v", err, c.want)
			}
			if !errors.Is(err, ErrNotStore) && !errors.Is(err, ErrCorrupt) && !errors.Is(err, ErrSchema) {
				t.Errorf("error %v wraps none of ErrNotStore, ErrCorrupt, ErrSchema", err)
			}
		})
	}
}

// readAll opens path read-only and reads everything a report or an export
// reads.
func readAll(path string) error {
	st, err := Open(path, &Options{ReadOnly: true})
	if err != nil {
		return err
	}
	defer st.Close()
	names, err := st.Experiments(context.Background())
	if err != nil {
		return err
	}
	for _, n := range names {
		if _, err := st.Aggregate(context.Background(), n); err != nil {
			return err
		}
	}
	return st.Export(context.Background(), io.Discard, time.Time{})
}

// TestParseIDIsStrict checks that each id has one text form: the last
// character of 26 carries 2 spare bits (RFC 4648 section 3.5: they must be
// zero), so a different last character must not alias the same id.
func TestParseIDIsStrict(t *testing.T) {
	id := NewID(t0)
	s := id.String()
	got, err := ParseID(s)
	if err != nil || got != id {
		t.Fatalf("ParseID(String()) = %v, %v", got, err)
	}
	alias := []byte(s)
	last := strings.IndexByte("abcdefghijklmnopqrstuvwxyz234567", alias[25])
	alias[25] = "abcdefghijklmnopqrstuvwxyz234567"[last|1]
	if _, err := ParseID(string(alias)); err == nil {
		t.Errorf("ParseID(%q) accepted an alias of %q", alias, s)
	}
}
