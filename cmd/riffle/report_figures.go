package main

import (
	"context"
	"fmt"
	"io"
	"slices"
	"time"

	"riffle/merge/verdict"
	"riffle/store"
	"riffle/store/breakdown"
)

// timelinePoints is about how many points Delta over time has.
const timelinePoints = 120

// reportBody is riffle report --format json: the experiment status (the
// keys of DESIGN.md's Interface, meaning unchanged) plus the report's own
// figures.
type reportBody struct {
	verdict.Status
	reportFigures
}

// reportFigures are what the report shows besides the status.
type reportFigures struct {
	// Stores counts the stores read.
	Stores int `json:"stores"`
	// Settings are the settings the numbers were computed under.
	Settings reportSettings `json:"settings"`
	// Open counts interleaved impressions still inside their window.
	Open int64 `json:"open"`
	// Events counts feedback events by type.
	Events map[string]int64 `json:"events"`
	// Days counts interleaved impressions per UTC day by outcome.
	Days []breakdown.Day `json:"days"`
	// Positions are the slots and events by position of each model's slots.
	Positions map[string][]breakdown.Position `json:"positions"`
	// Timeline is Delta and its intervals over the impressions served up to
	// each point's time.
	Timeline []breakdown.Point `json:"timeline"`
	// DecisionPoint is where the cumulative verdict first left undecided;
	// absent when it never did.
	DecisionPoint *breakdown.Decision `json:"decision_point,omitempty"`
	// UsersByFeedback counts users by their impressions with feedback.
	UsersByFeedback []userBin `json:"users_by_feedback"`
}

// reportSettings are the statistical and attribution settings; window and
// events are absent unless --config gave them (the store keeps neither).
type reportSettings struct {
	Alpha  float64            `json:"alpha"`
	Power  float64            `json:"power"`
	MDE    float64            `json:"mde"`
	Margin float64            `json:"margin"`
	Policy string             `json:"policy"`
	Window string             `json:"window,omitempty"`
	Events map[string]float64 `json:"events,omitempty"`
}

// userBin is one bar of the users histogram: users with between Min and
// Max impressions with feedback.
type userBin struct {
	Label string `json:"impressions"`
	Min   int64  `json:"min"`
	Max   int64  `json:"max"`
	Users int64  `json:"users"`
}

// readBreakdown reads the experiment's impressions from every store and
// adds them up.
func readBreakdown(ctx context.Context, stores []store.Reader, experiment string) (*breakdown.Breakdown, error) {
	var total *breakdown.Breakdown
	for _, s := range stores {
		pr, pw := io.Pipe()
		go func() { pw.CloseWithError(s.Export(ctx, pw, time.Time{})) }()
		b, err := breakdown.Read(pr, experiment)
		_ = pr.CloseWithError(io.ErrClosedPipe)
		if err != nil {
			return nil, err
		}
		if total == nil {
			total = b
			continue
		}
		total.Add(b)
	}
	return total, nil
}

// figuresOf computes the report's figures.
func figuresOf(s verdict.Status, agg store.Aggregate, b *breakdown.Breakdown, f reportFlags) (reportFigures, error) {
	fig := reportFigures{Stores: len(f.Stores), Open: b.Open, Events: b.Events, Days: b.Days, Positions: b.Positions,
		Settings:        reportSettings{Alpha: s.Alpha, Power: s.Power, MDE: s.MDE, Margin: s.Margin, Policy: s.Policy, Events: f.Events},
		UsersByFeedback: usersByFeedback(agg.Users)}
	if f.Window > 0 {
		fig.Settings.Window = f.Window.String()
	}
	if fig.Days == nil {
		fig.Days = []breakdown.Day{}
	}
	var err error
	fig.Timeline, fig.DecisionPoint, err = breakdown.Timeline(b.Finals, f.Params, timelinePoints)
	if err != nil {
		return fig, fmt.Errorf("Delta over time: %w", err)
	}
	if fig.Timeline == nil {
		fig.Timeline = []breakdown.Point{}
	}
	return fig, nil
}

// usersByFeedback bins users by their impressions with feedback in powers
// of two: 1, 2, 3-4, 5-8, ...
func usersByFeedback(users map[uint64][4]int64) []userBin {
	var bins []userBin
	for _, c := range users {
		n := c[1] + c[2] + c[3]
		if n == 0 {
			continue
		}
		i := 0
		for lim := int64(1); n > lim; lim *= 2 {
			i++
		}
		for len(bins) <= i {
			k := len(bins)
			lo, hi := int64(1)<<max(k-1, 0)+1, int64(1)<<k
			if k == 0 {
				lo = 1
			}
			label := fmt.Sprintf("%d-%d", lo, hi)
			if lo == hi {
				label = fmt.Sprint(lo)
			}
			bins = append(bins, userBin{Label: label, Min: lo, Max: hi})
		}
		bins[i].Users++
	}
	if bins == nil {
		return []userBin{}
	}
	return bins
}

// formatP formats a p-value so that it never reads 0: three decimals from
// 0.001 up, else one significant decimal and an exponent (1.0e-06).
func formatP(p float64) string {
	if p >= 0.001 {
		return fmt.Sprintf("%.3f", p)
	}
	return fmt.Sprintf("%.1e", p)
}

// formatInterval formats an interval for Delta with three decimals.
func formatInterval(iv verdict.Interval) string {
	return fmt.Sprintf("[%+.3f, %+.3f]", iv[0], iv[1])
}

// eventTypes returns the event types of the figures in a stable order:
// the configured weights' order by weight, else by name.
func eventTypes(fig reportFigures) []string {
	seen := map[string]bool{}
	var out []string
	for t := range fig.Events {
		seen[t] = true
	}
	for t := range fig.Settings.Events {
		seen[t] = true
	}
	for t := range seen {
		out = append(out, t)
	}
	slices.Sort(out)
	return out
}
