package store

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"flag"
	"fmt"
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

// exported is the part of one export line TestExportContent checks.
type exported struct {
	Impression string `json:"impression"`
	Time       string `json:"time"`
	User       string `json:"user"`
	Policy     string `json:"policy"`
	Fallback   string `json:"fallback"`
	Slots      []struct {
		Item string `json:"item"`
		Team string `json:"team"`
	} `json:"slots"`
	Events []struct {
		Item, Event, Time, Key string
		Slot                   int
	} `json:"events"`
	Outcome string              `json:"outcome"`
	Score   *map[string]float64 `json:"score"`
}

// TestExportContent checks what the golden files hold against the
// fixture's facts, worked out from exportFixture and Export's contract
// rather than from the output: the golden test alone would accept any
// output once regenerated with -update.
func TestExportContent(t *testing.T) {
	st := exportFixture(t)
	var buf bytes.Buffer
	if err := st.Export(t.Context(), &buf, time.Time{}); err != nil {
		t.Fatal(err)
	}
	var lines []exported
	sc := bufio.NewScanner(&buf)
	for sc.Scan() {
		var l exported
		if err := json.Unmarshal(sc.Bytes(), &l); err != nil {
			t.Fatalf("export line %q: %v", sc.Text(), err)
		}
		lines = append(lines, l)
	}
	// Oldest first: won (t0), plain (t0+1m), open (t0+1h).
	want := []struct{ id ID }{{fixedID(t0, 1)}, {fixedID(t0.Add(time.Minute), 3)}, {fixedID(t0.Add(time.Hour), 2)}}
	if len(lines) != len(want) {
		t.Fatalf("%d lines, want %d", len(lines), len(want))
	}
	for i, w := range want {
		if lines[i].Impression != w.id.String() {
			t.Errorf("line %d is impression %s, want %s", i+1, lines[i].Impression, w.id)
		}
	}
	won, plain, open := lines[0], lines[1], lines[2]
	// won: the challenger's b1 (slot 2 of a1 b1 a2 b2) clicked (weight 1)
	// and bought (3) within the window: team-draft credits the challenger 4.
	if won.Outcome != "challenger" || won.Score == nil || (*won.Score)["challenger"] != 4 || (*won.Score)["incumbent"] != 0 {
		t.Errorf("won: outcome %q, score %v; want challenger, 0 to 4", won.Outcome, won.Score)
	}
	if len(won.Events) != 2 || won.Events[0].Slot != 2 || won.Events[1].Key != "order-17" || won.Events[1].Event != "purchase" {
		t.Errorf("won: events %+v; want a click then the purchase keyed order-17, both at slot 2", won.Events)
	}
	if won.User != fmt.Sprintf("%016x", HashUser("shopper-1")) || won.Time != "2026-03-14T09:00:00Z" || won.Policy != "team-draft" {
		t.Errorf("won: user %q, time %q, policy %q", won.User, won.Time, won.Policy)
	}
	// plain: incumbent only, no feedback, finalised: outcome none, no score.
	if plain.Outcome != "none" || plain.Score != nil || plain.Policy != "" || plain.Fallback != "challenger-timeout" || len(plain.Events) != 0 {
		t.Errorf("plain: %+v; want outcome none, no score or policy, fallback challenger-timeout, no events", plain)
	}
	for _, s := range plain.Slots {
		if s.Team != "incumbent" {
			t.Errorf("plain: slot %s of team %q, want incumbent", s.Item, s.Team)
		}
	}
	// open: served at t0+1h, its window not closed at t0+45m: open, no
	// score, and its one event a click on a2 at slot 3.
	if open.Outcome != "open" || open.Score != nil || len(open.Events) != 1 || open.Events[0].Slot != 3 || open.User != "" {
		t.Errorf("open: %+v; want outcome open, no score or user, one event at slot 3", open)
	}
	var since bytes.Buffer
	if err := st.Export(t.Context(), &since, t0.Add(30*time.Second)); err != nil {
		t.Fatal(err)
	}
	if n := bytes.Count(since.Bytes(), []byte("\n")); n != 2 || bytes.Contains(since.Bytes(), []byte(won.Impression)) {
		t.Errorf("export since t0+30s: %d lines, want 2 without the impression served at t0:\n%s", n, since.Bytes())
	}
}
