package main

import (
	"bufio"
	"context"
	"encoding/json"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"riffle/merge"
	"riffle/store"
)

// exportEpoch is an arbitrary fixed instant for the export tests.
var exportEpoch = time.Date(2026, 5, 2, 8, 0, 0, 0, time.UTC)

// writeExportStore writes n one-minute-apart impressions with a click each
// and finalises the first half.
func writeExportStore(t *testing.T, n int) string {
	t.Helper()
	path := filepath.Join(t.TempDir(), "riffle.db")
	st, err := store.Open(path, &store.Options{FinalizeEvery: -1})
	if err != nil {
		t.Fatal(err)
	}
	var evs []store.Event
	for i := range n {
		at := exportEpoch.Add(time.Duration(i) * time.Minute)
		im := &store.Impression{ID: store.NewID(at), Time: at, Experiment: "spring-refresh", Policy: "team-draft",
			Slots: []merge.Slot{{Item: "seed-tray", Team: merge.Challenger, RankB: 1}, {Item: "trug", Team: merge.Incumbent, RankA: 1}}}
		im.Seed = im.ID.Seed()
		if !st.Record(im) {
			t.Fatal("Record = false")
		}
		evs = append(evs, store.Event{Impression: im.ID, Item: "seed-tray", Type: "click", Time: at.Add(time.Second)})
	}
	for i, err := range st.AddEvents(t.Context(), evs) {
		if err != nil {
			t.Fatalf("event %d: %v", i, err)
		}
	}
	if _, err := st.Finalize(context.Background(), exportEpoch.Add(time.Duration(n/2-1)*time.Minute+30*time.Minute)); err != nil {
		t.Fatal(err)
	}
	if err := st.Close(); err != nil {
		t.Fatal(err)
	}
	return path
}

func TestExportCommand(t *testing.T) {
	path := writeExportStore(t, 6)
	tests := []struct {
		name     string
		args     []string
		lines    int
		outcomes string
	}{
		{"everything", []string{"--store", path}, 6, "challenger challenger challenger open open open"},
		{"since a time", []string{"--store", path, "--since", "2026-05-02T08:04:00Z"}, 2, "open open"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			code, stdout, stderr := runCmd(t, runExport, tc.args...)
			if code != 0 {
				t.Fatalf("exit %d, stderr %q", code, stderr)
			}
			var outcomes []string
			sc := bufio.NewScanner(strings.NewReader(stdout))
			for sc.Scan() {
				var l struct {
					Outcome string            `json:"outcome"`
					Events  []json.RawMessage `json:"events"`
				}
				if err := json.Unmarshal(sc.Bytes(), &l); err != nil {
					t.Fatalf("line %q: %v", sc.Text(), err)
				}
				if len(l.Events) != 1 {
					t.Errorf("line with %d events, want 1", len(l.Events))
				}
				outcomes = append(outcomes, l.Outcome)
			}
			if got := strings.Join(outcomes, " "); len(outcomes) != tc.lines || got != tc.outcomes {
				t.Errorf("outcomes %q, want %q", got, tc.outcomes)
			}
		})
	}
}

func TestExportCommandProblems(t *testing.T) {
	path := writeExportStore(t, 1)
	live, err := store.Open(path, &store.Options{FinalizeEvery: -1})
	if err != nil {
		t.Fatal(err)
	}
	defer live.Close()
	tests := []struct {
		name string
		args []string
		code int
		says string
	}{
		{"no store", nil, 2, "--store is required"},
		{"bad since", []string{"--store", path, "--since", "last tuesday"}, 2, `"last tuesday" is neither`},
		{"stray argument", []string{"--store", path, "extra"}, 2, `unexpected argument "extra"`},
		{"missing file", []string{"--store", filepath.Join(t.TempDir(), "none.db")}, 1, "none.db"},
		{"locked by a live sidecar", []string{"--store", path, "--timeout", "100ms"}, 1, "locked by a running riffle (waited 100ms); use a copy"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			code, _, stderr := runCmd(t, runExport, tc.args...)
			if code != tc.code || !strings.Contains(stderr, tc.says) {
				t.Errorf("exit %d, stderr %q; want %d saying %q", code, stderr, tc.code, tc.says)
			}
		})
	}
}

func TestParseSince(t *testing.T) {
	now := time.Date(2026, 5, 2, 12, 0, 0, 0, time.UTC)
	for _, tc := range []struct {
		in   string
		want time.Time
	}{
		{"", time.Time{}},
		{"2026-05-01T00:00:00+02:00", time.Date(2026, 4, 30, 22, 0, 0, 0, time.UTC)},
		{"36h", now.Add(-36 * time.Hour)},
	} {
		got, err := parseSince(tc.in, now)
		if err != nil || !got.Equal(tc.want) {
			t.Errorf("parseSince(%q) = %v, %v; want %v", tc.in, got, err, tc.want)
		}
	}
	for _, bad := range []string{"-1h", "0s", "May 1"} {
		if _, err := parseSince(bad, now); err == nil {
			t.Errorf("parseSince(%q) succeeded", bad)
		}
	}
}
