package store

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"flag"
	"os"
	"path/filepath"
	"testing"
	"time"

	"riffle/merge"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata")

// exportFixture records three impressions (one final with a win, one open,
// one incumbent-only) with events, and finalises what is due.
func exportFixture(t *testing.T) *Store {
	st, _ := openTest(t, testOptions(newClock(t0)))
	won := teamDraftImpression(t0, 1, HashUser("shopper-1"))
	open := teamDraftImpression(t0.Add(time.Hour), 2, 0)
	plain := teamDraftImpression(t0.Add(time.Minute), 3, HashUser("shopper-2"))
	plain.Policy, plain.Fallback = "", "challenger-timeout"
	for i := range plain.Slots {
		plain.Slots[i].Team, plain.Slots[i].RankB = merge.Incumbent, 0
	}
	recordAll(t, st, won, open, plain)
	mustAdd(t, st,
		Event{Impression: won.ID, Item: "b1", Type: "click", Time: t0.Add(10 * time.Second)},
		Event{Impression: won.ID, Item: "b1", Type: "purchase", Time: t0.Add(5 * time.Minute), Key: "order-17"},
		Event{Impression: open.ID, Item: "a2", Type: "click", Time: t0.Add(time.Hour + time.Second)},
	)
	if n, err := st.Finalize(context.Background(), t0.Add(45*time.Minute)); n != 2 || err != nil {
		t.Fatalf("Finalize = %d, %v; want 2", n, err)
	}
	return st
}

func TestExportGolden(t *testing.T) {
	st := exportFixture(t)
	for _, tc := range []struct {
		golden string
		since  time.Time
	}{
		{"export-all.ndjson", time.Time{}},
		{"export-since.ndjson", t0.Add(30 * time.Second)},
	} {
		t.Run(tc.golden, func(t *testing.T) {
			var buf bytes.Buffer
			if err := st.Export(context.Background(), &buf, tc.since); err != nil {
				t.Fatal(err)
			}
			// Every line is a JSON object (RFC 8259) on its own line.
			sc := bufio.NewScanner(bytes.NewReader(buf.Bytes()))
			for sc.Scan() {
				var m map[string]any
				if err := json.Unmarshal(sc.Bytes(), &m); err != nil {
					t.Errorf("export line %q: %v", sc.Text(), err)
				}
			}
			path := filepath.Join("testdata", tc.golden)
			if *update {
				if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
					t.Fatal(err)
				}
			}
			want, err := os.ReadFile(path)
			if err != nil {
				t.Fatalf("%v (run go test -update to create it)", err)
			}
			if !bytes.Equal(buf.Bytes(), want) {
				t.Errorf("export differs from %s:\n got %s\nwant %s", path, buf.Bytes(), want)
			}
		})
	}
}
