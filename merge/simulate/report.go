package simulate

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"slices"
	"text/tabwriter"
)

// Report is the outcome of a simulation, one entry per policy.
type Report struct {
	ClickModel  string `json:"click_model"`
	Data        string `json:"data"` // "synthetic" or "judged"
	Runs        int    `json:"runs"`
	Impressions int    `json:"impressions"`
	Queries     int    `json:"queries"`
	Slots       int    `json:"slots"`
	Seed        uint64 `json:"seed"`
	// Clear counts the experiments whose rankers differ in mean NDCG, the
	// ones fidelity is measured on.
	Clear    int            `json:"clear"`
	Policies []PolicyReport `json:"policies"`
}

// PolicyReport is one policy's scores.
type PolicyReport struct {
	Policy string `json:"policy"`
	// Fidelity is the share of clear experiments whose Delta prefers the
	// ranker with the higher mean NDCG@Slots (a Delta of exactly 0 counts
	// half).
	Fidelity float64 `json:"fidelity"`
	// Delta is the mean Delta over clear experiments, signed so that
	// positive favours the better ranker: the size of the preference.
	Delta float64 `json:"delta"`
	// Decided is the share of experiments in which the sequential test
	// decided within the impressions, and Correct the share in which it
	// decided for the better ranker.
	Decided float64 `json:"decided"`
	Correct float64 `json:"correct"`
	// MedianImpressions is the median number of impressions until the
	// sequential test decided, an undecided experiment counting as never;
	// null when fewer than half decided.
	MedianImpressions *int `json:"median_impressions"`
	// Bias is the mean Delta (positive favours the challenger) under
	// random clicks (the "random" click model) on the experiments' own
	// list pairs, and BiasRotated the mean Delta when one uniformly random
	// slot is clicked on pairs whose challenger list is the incumbent's
	// rotated up by one. Both should be 0.
	Bias        float64 `json:"bias"`
	BiasRotated float64 `json:"bias_rotated"`
	// FalseDecided is the share of random-click experiments (own pairs and
	// rotated pairs together) in which the sequential test decided anyway;
	// at most alpha for an unbiased policy.
	FalseDecided float64 `json:"false_decided"`
	// CreditBiasRotated is the policy's own credit under one random click
	// on rotated pairs: summed Score.Challenger - Score.Incumbent over its
	// summed absolute value, averaged over experiments. Zero for a policy
	// whose expected credit is zero, even where the sign of the credit,
	// which Delta counts, is biased.
	CreditBiasRotated float64 `json:"credit_bias_rotated"`
}

// report aggregates the tallies of every task into a Report.
func (c Config) report(exps []experiment, tasks []task, results []tally) *Report {
	rep := &Report{ClickModel: c.ClickModel, Data: "synthetic", Runs: c.Runs,
		Impressions: c.Impressions, Queries: c.Queries, Slots: c.Slots, Seed: c.Seed}
	if c.Data != nil {
		rep.Data, rep.Queries = "judged", len(c.Data)
	}
	for _, e := range exps {
		if e.truth != 0 {
			rep.Clear++
		}
	}
	byPolicy := make([][kinds][]tally, len(c.Policies))
	for i, t := range tasks {
		byPolicy[t.policy][t.kind] = append(byPolicy[t.policy][t.kind], results[i])
	}
	for p, pol := range c.Policies {
		rep.Policies = append(rep.Policies, policyReport(pol.Name(), exps, byPolicy[p]))
	}
	return rep
}

// policyReport scores one policy from its tallies, indexed like exps.
func policyReport(name string, exps []experiment, ts [kinds][]tally) PolicyReport {
	pr := PolicyReport{Policy: name}
	var at []int
	clear := 0
	for r, e := range exps {
		m := &ts[kindModel][r]
		if e.truth != 0 {
			clear++
			d := m.delta() * float64(e.truth)
			pr.Delta += d
			switch {
			case d > 0:
				pr.Fidelity++
			case d == 0:
				pr.Fidelity += 0.5
			}
		}
		if m.decidedAt > 0 {
			pr.Decided++
			at = append(at, m.decidedAt)
			if m.dir == e.truth {
				pr.Correct++
			}
		}
		pr.Bias += ts[kindRandom][r].delta()
		pr.BiasRotated += ts[kindRotated][r].delta()
		pr.CreditBiasRotated += ts[kindRotated][r].creditBalance()
		for _, k := range []kind{kindRandom, kindRotated} {
			if ts[k][r].decidedAt > 0 {
				pr.FalseDecided++
			}
		}
	}
	runs := float64(len(exps))
	if clear > 0 {
		pr.Fidelity /= float64(clear)
		pr.Delta /= float64(clear)
	}
	pr.Decided /= runs
	pr.Correct /= runs
	pr.Bias /= runs
	pr.BiasRotated /= runs
	pr.CreditBiasRotated /= runs
	pr.FalseDecided /= 2 * runs
	for _, v := range []*float64{&pr.Fidelity, &pr.Delta, &pr.Decided, &pr.Correct, &pr.Bias,
		&pr.BiasRotated, &pr.FalseDecided, &pr.CreditBiasRotated} {
		*v = math.Round(*v*1e6) / 1e6 // six decimals: more is noise, and less brittle in golden files
	}
	if 2*len(at) >= len(exps) {
		// Undecided runs sort last, so the median is among the decided.
		slices.Sort(at)
		med := at[(len(exps)-1)/2]
		pr.MedianImpressions = &med
	}
	return pr
}

// WriteJSON writes the report as indented JSON.
func (r *Report) WriteJSON(w io.Writer) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	if err := enc.Encode(r); err != nil {
		return fmt.Errorf("simulate: write report: %w", err)
	}
	return nil
}

// WriteText writes the report as an aligned table with a legend.
func (r *Report) WriteText(w io.Writer) error {
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "policy\tfidelity\tdelta\tdecided\tcorrect\tmedian n\tbias\tbias rot.\tfalse dec.\tcredit rot.\t\n")
	for _, p := range r.Policies {
		med := fmt.Sprintf(">%d", r.Impressions)
		if p.MedianImpressions != nil {
			med = fmt.Sprint(*p.MedianImpressions)
		}
		fmt.Fprintf(tw, "%s\t%.3f\t%+.4f\t%.2f\t%.2f\t%s\t%+.4f\t%+.4f\t%.3f\t%+.4f\t\n",
			p.Policy, p.Fidelity, p.Delta, p.Decided, p.Correct, med, p.Bias, p.BiasRotated,
			p.FalseDecided, p.CreditBiasRotated)
	}
	if err := tw.Flush(); err != nil {
		return fmt.Errorf("simulate: write report: %w", err)
	}
	_, err := fmt.Fprintf(w, `
%d experiments (%d with a better ranker by NDCG@%d) of %d impressions each, %s queries (%d per experiment), %d slots, %s clicks, seed %d.
fidelity: share of experiments whose Delta prefers the ranker with the higher NDCG; delta: mean Delta towards it.
decided, correct: share in which the sequential test decided, and decided for the better ranker; median n: impressions until it decided.
bias: mean Delta under random clicks on the same pairs; bias rot.: under one random click, the challenger being the incumbent rotated up by one.
false dec.: share of random-click experiments in which the test decided anyway; credit rot.: the policy's own credit balance on rotated pairs.
`, r.Runs, r.Clear, r.Slots, r.Impressions, r.Data, r.Queries, r.Slots, r.ClickModel, r.Seed)
	if err != nil {
		return fmt.Errorf("simulate: write report: %w", err)
	}
	return nil
}
