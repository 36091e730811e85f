package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// TestSimulateCommand checks that riffle simulate runs every policy, is
// deterministic for a seed, and writes JSON with one entry per policy.
func TestSimulateCommand(t *testing.T) {
	args := []string{"--impressions", "800", "--runs", "2", "--queries", "5", "--seed", "9"}
	code, out1, errOut := runCmd(t, runSimulate, args...)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	_, out2, _ := runCmd(t, runSimulate, args...)
	if out1 != out2 {
		t.Errorf("same seed, different reports:\n%s\n%s", out1, out2)
	}
	for _, p := range []string{"balanced", "optimized", "probabilistic", "team-draft"} {
		if !strings.Contains(out1, p) {
			t.Errorf("report lacks %s:\n%s", p, out1)
		}
	}
	code, js, errOut := runCmd(t, runSimulate, append(args, "--format", "json", "--policy", "optimized", "--credit", "inverse-rank")...)
	if code != 0 {
		t.Fatalf("json: exit %d: %s", code, errOut)
	}
	var rep struct {
		Policies []struct{ Policy string } `json:"policies"`
		Seed     uint64                    `json:"seed"`
	}
	if err := json.Unmarshal([]byte(js), &rep); err != nil || len(rep.Policies) != 1 || rep.Policies[0].Policy != "optimized" || rep.Seed != 9 {
		t.Errorf("json report %s (%v): want one optimized entry, seed 9", js, err)
	}
}

// TestSimulateJudged runs riffle simulate on TREC-style files.
func TestSimulateJudged(t *testing.T) {
	dir := t.TempDir()
	write := func(name, body string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(body), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	var qrels, runA, runB strings.Builder
	for _, topic := range []string{"701", "702"} {
		for d := 1; d <= 12; d++ {
			grade := 0
			if d%3 == 0 {
				grade = d / 3
			}
			qrels.WriteString(topic + " 0 trowel-" + strconv.Itoa(d) + " " + strconv.Itoa(grade) + "\n")
			runA.WriteString(topic + " Q0 trowel-" + strconv.Itoa(d) + " " + strconv.Itoa(d) + " " + strconv.Itoa(100-d) + " inc\n")
			runB.WriteString(topic + " Q0 trowel-" + strconv.Itoa(13-d) + " " + strconv.Itoa(d) + " " + strconv.Itoa(100-d) + " chal\n")
		}
	}
	q, a, b := write("q.txt", qrels.String()), write("a.run", runA.String()), write("b.run", runB.String())
	code, out, errOut := runCmd(t, runSimulate, "--qrels", q, "--run-a", a, "--run-b", b,
		"--impressions", "600", "--runs", "2", "--policy", "team-draft", "--click-model", "perfect")
	if code != 0 || !strings.Contains(out, "judged queries (2 per experiment)") {
		t.Fatalf("exit %d, stderr %q, out:\n%s", code, errOut, out)
	}
	// A line the parser rejects is reported with file and line.
	bad := write("bad.run", "701 Q0 trowel-1 1\n")
	code, _, errOut = runCmd(t, runSimulate, "--qrels", q, "--run-a", bad, "--run-b", b)
	if code != 1 || !strings.Contains(errOut, "bad.run:1: syntax error") {
		t.Errorf("bad run: exit %d, stderr %q", code, errOut)
	}
	code, _, errOut = runCmd(t, runSimulate, "--qrels", filepath.Join(dir, "missing"), "--run-a", a, "--run-b", b)
	if code != 1 || !strings.Contains(errOut, "missing") {
		t.Errorf("missing qrels: exit %d, stderr %q", code, errOut)
	}
}

// TestSimulateBadFlags checks that each bad flag gets exit 2 and a message
// naming it.
func TestSimulateBadFlags(t *testing.T) {
	tests := []struct {
		args []string
		want string
	}{
		{[]string{"--policy", "zipper"}, "--policy"},
		{[]string{"--click-model", "lazy"}, "--click-model"},
		{[]string{"--impressions", "0"}, "--impressions 0"},
		{[]string{"--format", "xml"}, "--format"},
		{[]string{"--qrels", "q.txt"}, "--qrels, --run-a and --run-b"},
		{[]string{"--tau", "-1", "--policy", "probabilistic"}, "tau"},
		{[]string{"--credit", "log", "--policy", "optimized"}, "credit"},
		{[]string{"--mde", "0.9"}, "--mde"},
		{[]string{"extra"}, "unexpected argument"},
		{[]string{"--slots", "x"}, "invalid value"},
	}
	for _, tc := range tests {
		code, _, errOut := runCmd(t, runSimulate, tc.args...)
		if code != 2 || !strings.Contains(errOut, tc.want) {
			t.Errorf("%v: exit %d, stderr %q; want 2 and %q", tc.args, code, errOut, tc.want)
		}
	}
}
