package main

import (
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"time"

	"riffle/merge/verdict"
)

// planFlags are riffle plan's settings; a zero FeedbackRate or TrafficPerDay
// means not given.
type planFlags struct {
	MDE, Alpha, Power, Ramp float64
	FeedbackRate            float64
	TrafficPerDay           float64
	Traffic                 string
	Format                  string
}

// planSize is one test's requirement; nil fields are unknown for want of
// --feedback-rate or --traffic.
type planSize struct {
	WithFeedback int64    `json:"with_feedback"`
	Interleaved  *int64   `json:"interleaved"`
	Impressions  *int64   `json:"impressions"`
	Days         *float64 `json:"days"`
}

// planResult is riffle plan's JSON output.
type planResult struct {
	MDE           float64  `json:"mde"`
	Alpha         float64  `json:"alpha"`
	Power         float64  `json:"power"`
	Ramp          float64  `json:"ramp"`
	FeedbackRate  *float64 `json:"feedback_rate"`
	TrafficPerDay *float64 `json:"traffic_per_day"`
	// Fixed is for a fixed-sample test looked at once; Sequential for the
	// always-valid test the verdict uses.
	Fixed      planSize `json:"fixed"`
	Sequential planSize `json:"sequential"`
}

// runPlan prints the sample size and duration an experiment needs to detect
// Delta = --mde: exit 0, or 2 on bad flags.
func runPlan(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	f, err := parsePlanFlags(args, stderr)
	if err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return 0
		}
		if !errors.Is(err, errUsage) {
			fmt.Fprintf(stderr, "riffle plan: %v\n", err)
		}
		return 2
	}
	res, err := plan(f)
	if err != nil {
		fmt.Fprintf(stderr, "riffle plan: %v\n", err)
		return 2
	}
	if f.Format == "json" {
		err = writeJSON(stdout, res)
	} else {
		err = writePlanText(stdout, res)
	}
	if err != nil {
		fmt.Fprintf(stderr, "riffle plan: %v\n", err)
		return 1
	}
	return 0
}

// errUsage marks a flag error the flag package has already printed.
var errUsage = errors.New("usage")

func parsePlanFlags(args []string, stderr io.Writer) (planFlags, error) {
	var f planFlags
	fs := flag.NewFlagSet("riffle plan", flag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.Float64Var(&f.MDE, "mde", 0, "minimum detectable Delta, in (0, 0.5) (required)")
	fs.Float64Var(&f.Alpha, "alpha", 0.05, "two-sided significance level")
	fs.Float64Var(&f.Power, "power", 0.8, "power at Delta = mde")
	fs.Float64Var(&f.Ramp, "ramp", 1, "share of users who get interleaved lists, in (0, 1]")
	fs.Float64Var(&f.FeedbackRate, "feedback-rate", 0, "share of interleaved impressions that get feedback, in (0, 1]")
	fs.StringVar(&f.Traffic, "traffic", "", "impressions served on the routes, e.g. 50000/day, 2000/h, 30/s")
	fs.StringVar(&f.Format, "format", "text", "output format: text or json")
	fs.Usage = func() {
		fmt.Fprintln(stderr, "usage: riffle plan --mde D [--alpha A] [--power P] [--traffic N/day] [--feedback-rate R] [--ramp S] [--format text|json]")
		fs.PrintDefaults()
	}
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, flag.ErrHelp) {
			return f, err
		}
		return f, errUsage
	}
	if fs.NArg() > 0 {
		return f, fmt.Errorf("unexpected argument %q", fs.Arg(0))
	}
	set := map[string]bool{}
	fs.Visit(func(fl *flag.Flag) { set[fl.Name] = true })
	switch {
	case !set["mde"]:
		return f, errors.New("--mde is required, e.g. --mde 0.02")
	case f.Format != "text" && f.Format != "json":
		return f, fmt.Errorf("--format %q: want text or json", f.Format)
	case !(f.MDE > 0 && f.MDE < 0.5):
		return f, fmt.Errorf("--mde %v: want a Delta in (0, 0.5)", f.MDE)
	case !(f.Alpha > 0 && f.Alpha < 1):
		return f, fmt.Errorf("--alpha %v: want a level in (0, 1)", f.Alpha)
	case !(f.Power > 0 && f.Power < 1):
		return f, fmt.Errorf("--power %v: want a probability in (0, 1)", f.Power)
	case !(f.Ramp > 0 && f.Ramp <= 1):
		return f, fmt.Errorf("--ramp %v: want a share in (0, 1]", f.Ramp)
	case set["feedback-rate"] && !(f.FeedbackRate > 0 && f.FeedbackRate <= 1):
		return f, fmt.Errorf("--feedback-rate %v: want a share in (0, 1]", f.FeedbackRate)
	}
	if f.Traffic != "" {
		perDay, err := parseTraffic(f.Traffic)
		if err != nil {
			return f, fmt.Errorf("--traffic: %w", err)
		}
		f.TrafficPerDay = perDay
	}
	return f, nil
}

// trafficUnits are the named units of --traffic.
var trafficUnits = map[string]time.Duration{
	"s": time.Second, "sec": time.Second, "second": time.Second,
	"m": time.Minute, "min": time.Minute, "minute": time.Minute,
	"h": time.Hour, "hour": time.Hour,
	"d": 24 * time.Hour, "day": 24 * time.Hour,
	"w": 7 * 24 * time.Hour, "week": 7 * 24 * time.Hour,
}

// parseTraffic parses a traffic rate, "N/unit" with unit one of
// trafficUnits or a Go duration ("N/90m"), or a bare "N" per day, into
// impressions per day.
func parseTraffic(s string) (float64, error) {
	num, unit, hasUnit := strings.Cut(strings.TrimSpace(s), "/")
	n, err := strconv.ParseFloat(strings.ReplaceAll(strings.TrimSpace(num), "_", ""), 64)
	if err != nil || !(n > 0) || math.IsInf(n, 0) {
		return 0, fmt.Errorf("%q: want a positive number of impressions, e.g. 50000/day", s)
	}
	per := 24 * time.Hour
	if hasUnit {
		unit = strings.TrimSpace(unit)
		var ok bool
		if per, ok = trafficUnits[unit]; !ok {
			if per, err = time.ParseDuration(unit); err != nil || per <= 0 {
				return 0, fmt.Errorf("%q: unknown unit %q: want s, min, h, day, week or a duration such as 90m", s, unit)
			}
		}
	}
	perDay := n * float64(24*time.Hour) / float64(per)
	if math.IsInf(perDay, 0) {
		return 0, fmt.Errorf("%q: rate too large", s)
	}
	return perDay, nil
}

// plan computes both tests' requirements.
func plan(f planFlags) (planResult, error) {
	res := planResult{MDE: f.MDE, Alpha: f.Alpha, Power: f.Power, Ramp: f.Ramp}
	if f.FeedbackRate > 0 {
		res.FeedbackRate = &f.FeedbackRate
	}
	if f.TrafficPerDay > 0 {
		res.TrafficPerDay = &f.TrafficPerDay
	}
	fixed, err := verdict.SampleSize(f.Alpha, f.Power, f.MDE)
	if err != nil {
		return res, err
	}
	seq, err := verdict.SequentialSampleSize(f.Alpha, f.Power, f.MDE)
	if err != nil {
		return res, err
	}
	res.Fixed, res.Sequential = f.size(fixed), f.size(seq)
	return res, nil
}

// size turns impressions with feedback into impressions to serve and days.
func (f planFlags) size(withFeedback int64) planSize {
	s := planSize{WithFeedback: withFeedback}
	if f.FeedbackRate <= 0 {
		return s
	}
	interleaved := verdict.CeilCount(float64(withFeedback) / f.FeedbackRate)
	served := verdict.CeilCount(float64(interleaved) / f.Ramp)
	s.Interleaved, s.Impressions = &interleaved, &served
	if f.TrafficPerDay > 0 {
		days := float64(served) / f.TrafficPerDay
		s.Days = &days
	}
	return s
}

func writeJSON(w io.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	enc.SetEscapeHTML(false)
	return enc.Encode(v)
}

func writePlanText(w io.Writer, r planResult) error {
	var b strings.Builder
	fmt.Fprintf(&b, "riffle plan: detect Delta = %g (a win share of %g against 0.5)\n", r.MDE, math.Round((0.5+r.MDE)*1e12)/1e12)
	fmt.Fprintf(&b, "alpha %g (two-sided), power %g, ramp %g", r.Alpha, r.Power, r.Ramp)
	if r.FeedbackRate != nil {
		fmt.Fprintf(&b, ", feedback rate %g", *r.FeedbackRate)
	}
	perDay := ""
	if r.TrafficPerDay != nil {
		perDay = group(int64(math.Round(*r.TrafficPerDay))) + "/day"
		fmt.Fprintf(&b, ", traffic %s", perDay)
	}
	b.WriteString("\n\n")
	rows := [][3]string{{"", "fixed-sample test", "always-valid test"}}
	row := func(label string, get func(planSize) string) {
		rows = append(rows, [3]string{label, get(r.Fixed), get(r.Sequential)})
	}
	row("impressions with feedback", func(s planSize) string { return group(s.WithFeedback) })
	if r.FeedbackRate != nil {
		row("interleaved impressions", func(s planSize) string { return group(*s.Interleaved) })
		row(fmt.Sprintf("impressions served (ramp %g)", r.Ramp), func(s planSize) string { return group(*s.Impressions) })
		if r.TrafficPerDay != nil {
			row("days at "+perDay, func(s planSize) string { return strconv.FormatFloat(*s.Days, 'f', 2, 64) })
		}
	}
	writeTable(&b, rows)
	b.WriteString(planNotes(r))
	_, err := io.WriteString(w, b.String())
	return err
}

// writeTable writes rows with the first column left-aligned and the others
// right-aligned, two spaces apart.
func writeTable(b *strings.Builder, rows [][3]string) {
	var width [3]int
	for _, r := range rows {
		for i, c := range r {
			width[i] = max(width[i], len(c))
		}
	}
	for _, r := range rows {
		fmt.Fprintf(b, "%-*s  %*s  %*s\n", width[0], r[0], width[1], r[1], width[2], r[2])
	}
}

func planNotes(r planResult) string {
	notes := "\nThe verdict waits for the always-valid test, which may be watched live;\n" +
		"the fixed-sample size holds only for a single look at the end. Both\n" +
		"assume no ties (ties only lower them) and independent impressions:\n" +
		"multiply by the design effect riffle report shows once users return.\n"
	if r.FeedbackRate == nil {
		notes += "Pass --feedback-rate to turn these into impressions to serve.\n"
	} else if r.TrafficPerDay == nil {
		notes += "Pass --traffic to turn these into days.\n"
	}
	return notes
}

// group formats n with commas between groups of three digits.
func group(n int64) string {
	s := strconv.FormatInt(n, 10)
	neg := strings.HasPrefix(s, "-")
	s = strings.TrimPrefix(s, "-")
	var b strings.Builder
	for i, c := range s {
		if i > 0 && (len(s)-i)%3 == 0 {
			b.WriteByte(',')
		}
		b.WriteRune(c)
	}
	if neg {
		return "-" + b.String()
	}
	return b.String()
}
