package store

import (
	"time"

	"riffle/merge/verdict"
)

// Aggregate is what the statistics need of one experiment, summed over
// finalised impressions. Aggregates of several store files (one per sidecar)
// add field by field; see Aggregate.Add.
type Aggregate struct {
	// Experiment is the experiment's name.
	Experiment string
	// Policy is the policy of the most recent interleaved impression.
	Policy string
	// Impressions counts every impression served, interleaved or not.
	Impressions int64
	// Interleaved counts impressions that showed a merged list.
	Interleaved int64
	// Outcomes counts finalised interleaved impressions by merge.Outcome
	// (index 0 none, 1 incumbent, 2 challenger, 3 tie).
	Outcomes [4]int64
	// Users holds the same counts per hashed user key, for variance
	// clustered by user.
	Users map[uint64][4]int64
	// RecentImpressions counts interleaved impressions served in the hour
	// before RecentEnd (the newest impression's time), and RecentWithFeedback
	// those of them that are finalised with feedback; together they give
	// the traffic rate behind the ETA.
	RecentImpressions, RecentWithFeedback int64
	// RecentSpan is the span actually covered by the recent counts (at most
	// one hour; shorter when the experiment is younger).
	RecentSpan time.Duration
	// RecentEnd is the time the recent window ends at.
	RecentEnd time.Time
	// Start is when the store first saw the experiment.
	Start time.Time
}

// Add folds o into a, as when merging the stores of several sidecars.
func (a *Aggregate) Add(o Aggregate) {
	a.Impressions += o.Impressions
	a.Interleaved += o.Interleaved
	for i := range a.Outcomes {
		a.Outcomes[i] += o.Outcomes[i]
	}
	if a.Users == nil {
		a.Users = make(map[uint64][4]int64, len(o.Users))
	}
	for u, c := range o.Users {
		cur := a.Users[u]
		for i := range cur {
			cur[i] += c[i]
		}
		a.Users[u] = cur
	}
	a.RecentImpressions += o.RecentImpressions
	a.RecentWithFeedback += o.RecentWithFeedback
	if o.RecentSpan > a.RecentSpan {
		a.RecentSpan = o.RecentSpan
	}
	if o.RecentEnd.After(a.RecentEnd) {
		a.RecentEnd = o.RecentEnd
	}
	if a.Start.IsZero() || (!o.Start.IsZero() && o.Start.Before(a.Start)) {
		a.Start = o.Start
	}
	if a.Policy == "" {
		a.Policy = o.Policy
	}
	if a.Experiment == "" {
		a.Experiment = o.Experiment
	}
}

// Input returns the statistics' input for the aggregate under p. Ramp is
// left nil: the store does not know the ramp in force.
func (a Aggregate) Input(p verdict.Params) verdict.Input {
	return verdict.Input{
		Experiment:         a.Experiment,
		Policy:             a.Policy,
		Impressions:        a.Impressions,
		Interleaved:        a.Interleaved,
		Outcomes:           a.Outcomes,
		Users:              a.Users,
		RecentImpressions:  a.RecentImpressions,
		RecentWithFeedback: a.RecentWithFeedback,
		RecentSpan:         a.RecentSpan,
		Params:             p,
	}
}
