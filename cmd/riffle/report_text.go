package main

import (
	"fmt"
	"slices"
	"strings"
	"time"

	"riffle/store/breakdown"
)

// storesRead says how many stores the report read: "1 store", "3 stores".
func storesRead(n int) string {
	if n == 1 {
		return "1 store"
	}
	return fmt.Sprintf("%d stores", n)
}

// writeFiguresText prints the report's figures after the verdict: the
// decision point, Delta over time, outcomes per day, rates by position,
// events by type, users by impressions with feedback and the settings.
func writeFiguresText(b *strings.Builder, fig reportFigures) {
	if d := fig.DecisionPoint; d != nil {
		fmt.Fprintf(b, "\nfirst decided: %s with the impressions served up to %s (%s with feedback; p = %s, Delta %+.3f in %s)\n",
			d.Verdict, d.Time.UTC().Format(time.RFC3339), group(d.WithFeedback), formatP(d.PValue), d.Delta, formatInterval(d.CSDelta))
	}
	if n := len(fig.Timeline); n > 0 {
		fmt.Fprintf(b, "\nDelta over time (impressions served up to; always-valid interval; fixed-sample interval)\n")
		step := max(1, n/6)
		for i := 0; i < n; i += step {
			writeTimelineRow(b, fig.Timeline[i])
		}
		if (n-1)%step != 0 {
			writeTimelineRow(b, fig.Timeline[n-1])
		}
	}
	if len(fig.Days) > 0 {
		fmt.Fprintf(b, "\noutcomes per day (UTC)   challenger  incumbent        tie   no feedback      open\n")
		for _, d := range fig.Days {
			o := d.Outcomes
			fmt.Fprintf(b, "  %-22s %10s %10s %10s %13s %9s\n", d.Date, group(o["challenger"]), group(o["incumbent"]), group(o["tie"]), group(o["none"]), group(o["open"]))
		}
	}
	for _, ev := range eventTypes(fig) {
		writePositionsText(b, fig.Positions, ev)
	}
	if len(fig.Events) > 0 {
		var parts []string
		for _, t := range eventTypes(fig) {
			parts = append(parts, fmt.Sprintf("%s %s", t, group(fig.Events[t])))
		}
		fmt.Fprintf(b, "\nevents by type: %s\n", strings.Join(parts, ", "))
	}
	if len(fig.UsersByFeedback) > 0 {
		var parts []string
		for _, u := range fig.UsersByFeedback {
			parts = append(parts, fmt.Sprintf("%s: %s", u.Label, group(u.Users)))
		}
		fmt.Fprintf(b, "users by impressions with feedback: %s\n", strings.Join(parts, ", "))
	}
	writeSettingsText(b, fig.Settings)
}

func writeTimelineRow(b *strings.Builder, p breakdown.Point) {
	fmt.Fprintf(b, "  %s  %8s with feedback  Delta %+.3f  %s  %s  %s\n", p.Time.UTC().Format(time.RFC3339), group(p.WithFeedback),
		p.Delta, formatInterval(p.CSDelta), formatInterval(p.CI), p.Verdict)
}

// writePositionsText prints one event type's rate by position for each
// model's slots.
func writePositionsText(b *strings.Builder, pos map[string][]breakdown.Position, ev string) {
	inc, chal := pos[breakdown.Incumbent], pos[breakdown.Challenger]
	n := max(len(inc), len(chal))
	if n == 0 {
		return
	}
	fmt.Fprintf(b, "\n%s rate by position   incumbent's slots      challenger's slots\n", ev)
	cell := func(ps []breakdown.Position, i int) string {
		if i >= len(ps) || ps[i].Shown == 0 {
			return "-"
		}
		return fmt.Sprintf("%5.1f%% of %s", 100*ps[i].Rate(ev), group(ps[i].Shown))
	}
	for i := range n {
		fmt.Fprintf(b, "  %-19d %-22s %s\n", i+1, cell(inc, i), cell(chal, i))
	}
}

func writeSettingsText(b *strings.Builder, s reportSettings) {
	window := "not given (pass --config)"
	if s.Window != "" {
		window = s.Window
	}
	weights := "not given (pass --config)"
	if len(s.Events) > 0 {
		var parts []string
		for _, t := range sortedKeys(s.Events) {
			parts = append(parts, fmt.Sprintf("%s %g", t, s.Events[t]))
		}
		weights = strings.Join(parts, ", ")
	}
	fmt.Fprintf(b, "settings: alpha %g, power %g, mde %g, margin %g, policy %s, window %s, event weights %s\n",
		s.Alpha, s.Power, s.MDE, s.Margin, orDash(s.Policy), window, weights)
}

func sortedKeys[V any](m map[string]V) []string {
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	return keys
}
