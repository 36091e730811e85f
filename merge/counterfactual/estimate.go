package counterfactual

import (
	"fmt"
	"math"

	"riffle/merge/verdict"
)

// MinESS is the effective sample size below which an estimate is not to be
// trusted. The interval is a normal approximation to a weighted mean, and
// Kish's effective sample size (sum w)^2 / sum w^2 is how many unweighted
// impressions the weighted ones are worth (Kish, Survey Sampling, 1965,
// section 11.7). 100 is common practice, not a published bound; in this
// package's simulation the 95% interval's measured coverage holds near
// nominal above it (see TestReplaySimulation).
const MinESS = 100

// Estimate is the offline estimate of a comparison's Delta from weighted
// impressions.
type Estimate struct {
	// Terms counts the impressions weighed, with or without overlap.
	Terms int `json:"impressions"`
	// NoOverlap counts those the target could not have shown (weight 0).
	NoOverlap int `json:"no_overlap"`
	// Users counts the clusters (users; impressions without a user key
	// count one each) among impressions of positive weight.
	Users int `json:"users"`
	// Delta estimates (W + T/2)/n - 1/2 of the target comparison, the
	// candidate in the challenger's role: half the ratio estimate of E[o].
	Delta float64 `json:"delta"`
	// SE is Delta's standard error: the delta-method variance of the ratio
	// estimator, clustered by user.
	SE float64 `json:"se"`
	// CI is Delta +- z(1 - alpha/2) SE, clipped to [-0.5, 0.5].
	CI verdict.Interval `json:"ci"`
	// Alpha is the interval's two-sided level.
	Alpha float64 `json:"alpha"`
	// ESS is Kish's effective sample size of the weights.
	ESS float64 `json:"effective_sample_size"`
	// MeanWeight is the weights' mean: near 1 when the target shows the
	// logged kinds of list about as often as the source did, well below 1
	// when much of what the target would show was never logged.
	MeanWeight float64 `json:"mean_weight"`
	// Trusted says ESS is at least MinESS.
	Trusted bool `json:"trusted"`
}

// Combine returns the estimate from the terms of impressions with clicks
// (terms without a click are ignored: riffle's Delta counts impressions
// with feedback only) at two-sided level alpha in (0, 1).
func Combine(terms []Term, alpha float64) (Estimate, error) {
	if !(alpha > 0 && alpha < 1) {
		return Estimate{}, fmt.Errorf("counterfactual: alpha %v: want a level in (0, 1)", alpha)
	}
	e := Estimate{Alpha: alpha, CI: verdict.Interval{-0.5, 0.5}}
	type sums struct{ wo, w float64 }
	byUser := map[uint64]*sums{}
	var single []sums
	var sw, sww, swo float64
	for _, t := range terms {
		if !t.Clicked {
			continue
		}
		e.Terms++
		if t.Weight <= 0 {
			e.NoOverlap++
			continue
		}
		sw += t.Weight
		sww += t.Weight * t.Weight
		swo += t.Weight * t.Outcome
		if t.User == 0 {
			single = append(single, sums{t.Weight * t.Outcome, t.Weight})
			continue
		}
		s := byUser[t.User]
		if s == nil {
			s = &sums{}
			byUser[t.User] = s
		}
		s.wo += t.Weight * t.Outcome
		s.w += t.Weight
	}
	if e.Terms > 0 {
		e.MeanWeight = sw / float64(e.Terms)
	}
	if sw == 0 {
		return e, nil
	}
	r := swo / sw
	e.ESS = sw * sw / sww
	e.Trusted = e.ESS >= MinESS
	e.Delta = r / 2
	e.Users = len(byUser) + len(single)
	var ss float64
	for _, s := range byUser {
		ss += (s.wo - r*s.w) * (s.wo - r*s.w)
	}
	for _, s := range single {
		ss += (s.wo - r*s.w) * (s.wo - r*s.w)
	}
	k := float64(e.Users)
	if k < 2 {
		return e, nil // no variance from one cluster: the interval stays [-0.5, 0.5]
	}
	e.SE = math.Sqrt(k/(k-1)*ss) / sw / 2
	z := math.Sqrt2 * math.Erfinv(1-alpha)
	e.CI = verdict.Interval{max(-0.5, e.Delta-z*e.SE), min(0.5, e.Delta+z*e.SE)}
	return e, nil
}
