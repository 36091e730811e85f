package simulate

import (
	"bytes"
	"context"
	"errors"
	"flag"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"riffle/merge"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata")

// allPolicies builds every policy merge knows, with default options.
func allPolicies(t *testing.T) []merge.Policy {
	t.Helper()
	var ps []merge.Policy
	for _, n := range merge.Names() {
		p, err := merge.New(n, merge.Options{})
		if err != nil {
			t.Fatal(err)
		}
		ps = append(ps, p)
	}
	return ps
}

// byName indexes a report's policies.
func byName(r *Report) map[string]PolicyReport {
	m := map[string]PolicyReport{}
	for _, p := range r.Policies {
		m[p.Policy] = p
	}
	return m
}

// TestGolden checks the text and JSON reports of a small simulation of
// every policy against testdata (go test -update rewrites them), and that
// the report does not depend on how many goroutines ran it.
func TestGolden(t *testing.T) {
	cfg := Config{Policies: allPolicies(t), Impressions: 1500, Runs: 4, Queries: 8, Seed: 1}
	var outs [2][2]bytes.Buffer
	for i, workers := range []int{1, 3} {
		cfg.Workers = workers
		rep, err := Run(context.Background(), cfg)
		if err != nil {
			t.Fatal(err)
		}
		if err := rep.WriteText(&outs[i][0]); err != nil {
			t.Fatal(err)
		}
		if err := rep.WriteJSON(&outs[i][1]); err != nil {
			t.Fatal(err)
		}
	}
	for j, name := range []string{"report.txt", "report.json"} {
		if !bytes.Equal(outs[0][j].Bytes(), outs[1][j].Bytes()) {
			t.Fatalf("%s differs between 1 and 3 workers:\n%s\n%s", name, outs[0][j].String(), outs[1][j].String())
		}
		path := filepath.Join("testdata", name)
		if *update {
			if err := os.WriteFile(path, outs[0][j].Bytes(), 0o644); err != nil {
				t.Fatal(err)
			}
			continue
		}
		want, err := os.ReadFile(path)
		if err != nil {
			t.Fatalf("%v (go test -update writes it)", err)
		}
		if got := outs[0][j].Bytes(); !bytes.Equal(got, want) {
			t.Errorf("%s:\ngot\n%s\nwant\n%s", name, got, want)
		}
	}
}

// TestRotatedBias checks the preference each policy reports when one
// uniformly random slot is clicked on rotated pairs, A = (d1..d10) and
// B = (d2..d10, d1), against values derived from the definitions. Every
// policy shows all ten items, so the click lands on d1 with probability
// 1/10. Balanced credit (Chapelle et al., TOIS 2012, section 2) and the
// rank-difference credit of optimized interleaving (Radlinski & Craswell,
// WSDM 2013) both depend on the clicked item alone: d1 favours A and every
// other item B (ranked one higher there), so Delta = 9/10 - 1/2 = 0.4.
// Optimized's expected credit is still zero (-9 x 1/10 + 1 x 9/10), and so
// is probabilistic interleaving's expected outcome (Hofmann et al., TOIS
// 2013); team draft is unbiased both ways (Radlinski et al., CIKM 2008).
func TestRotatedBias(t *testing.T) {
	rep, err := Run(context.Background(), Config{Policies: allPolicies(t), Impressions: 6000, Runs: 4, Queries: 10, Seed: 7})
	if err != nil {
		t.Fatal(err)
	}
	// One experiment's Delta over n single-click impressions has standard
	// error at most 0.5/sqrt(n); averaged over runs it shrinks by sqrt(runs).
	se := 0.5 / math.Sqrt(6000*4)
	tests := []struct {
		policy               string
		delta, credit, slack float64
	}{
		{"balanced", 0.4, 0.8, 5 * se},
		{"optimized", 0.4, 0, 5 * se},
		{"team-draft", 0, 0, 5 * se},
	}
	got := byName(rep)
	for _, tc := range tests {
		p := got[tc.policy]
		if math.Abs(p.BiasRotated-tc.delta) > tc.slack {
			t.Errorf("%s: rotated Delta %+.4f, want %+.1f", tc.policy, p.BiasRotated, tc.delta)
		}
		if math.Abs(p.CreditBiasRotated-tc.credit) > 0.05 {
			t.Errorf("%s: rotated credit balance %+.4f, want %+.1f", tc.policy, p.CreditBiasRotated, tc.credit)
		}
	}
	if p := got["probabilistic"]; math.Abs(p.CreditBiasRotated) > 0.05 {
		t.Errorf("probabilistic: rotated credit balance %+.4f, want 0", p.CreditBiasRotated)
	}
	if p := got["team-draft"]; math.Abs(p.Bias) > 5*se {
		t.Errorf("team-draft: Delta under random clicks %+.4f, want 0", p.Bias)
	}
}

// TestFidelityClearCase checks that with a nearly perfect challenger and a
// poor incumbent every policy prefers the challenger in every experiment,
// and the sequential test decides for it, under perfect users.
func TestFidelityClearCase(t *testing.T) {
	data := Synthetic(rand.New(rand.NewPCG(2, 2)), 30, 10, 3, 0.2)
	rep, err := Run(context.Background(), Config{Policies: allPolicies(t), ClickModel: "perfect",
		Impressions: 3000, Runs: 3, Data: data, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	if rep.Clear != 3 || rep.Data != "judged" || rep.Queries != 30 {
		t.Fatalf("report header %+v", rep)
	}
	for _, p := range rep.Policies {
		if p.Fidelity != 1 || p.Correct != 1 || p.Delta <= 0 || p.MedianImpressions == nil {
			t.Errorf("%s: fidelity %v, correct %v, delta %v; want every experiment for the challenger",
				p.Policy, p.Fidelity, p.Correct, p.Delta)
		}
	}
}

// TestRunErrors checks configuration errors and cancellation.
func TestRunErrors(t *testing.T) {
	ps := allPolicies(t)
	bad := []Config{
		{},
		{Policies: ps, Impressions: -1},
		{Policies: ps, Alpha: 2},
		{Policies: ps, MDE: 0.7},
	}
	for _, c := range bad {
		if _, err := Run(context.Background(), c); !errors.Is(err, ErrConfig) {
			t.Errorf("%+v: err %v, want ErrConfig", c, err)
		}
	}
	if _, err := Run(context.Background(), Config{Policies: ps, ClickModel: "lazy"}); !errors.Is(err, ErrUnknownClickModel) {
		t.Errorf("unknown click model: err %v", err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := Run(ctx, Config{Policies: ps, Runs: 2, Impressions: 100}); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled: err %v, want context.Canceled", err)
	}
}
