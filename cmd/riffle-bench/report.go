package main

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"runtime"
	"strconv"
	"text/tabwriter"
	"time"
)

// report is the bench's result, printed as a table or, with --json, as
// one JSON object.
type report struct {
	Date          string                 `json:"date"`
	GoVersion     string                 `json:"go_version"`
	GOMAXPROCS    int                    `json:"gomaxprocs"`
	NumCPU        int                    `json:"num_cpu"`
	LoadGenerator string                 `json:"load_generator"`
	Settings      settings               `json:"settings"`
	Modes         map[string]*modeReport `json:"modes"`
	BackendsRSS   *float64               `json:"backends_peak_rss_mib"`
	Ratios        *ratios                `json:"ratios"`
	Targets       []target               `json:"targets"`
	Elapsed       float64                `json:"elapsed_seconds"`
}

// settings echo what the run measured under.
type settings struct {
	Duration       string `json:"duration"`
	Rounds         int    `json:"rounds"`
	Concurrency    int    `json:"concurrency"`
	Rate           int    `json:"rate"`
	RateFrom       string `json:"rate_from"`
	BackendLatency string `json:"backend_latency"`
	BackendTimeout string `json:"backend_timeout"`
	ItemsPerList   int    `json:"items_per_list"`
}

// modeReport is one mode's pooled figures.
type modeReport struct {
	Throughput     float64      `json:"throughput_rps"`
	ClosedRequests int          `json:"closed_loop_requests"`
	ClosedErrors   int          `json:"closed_loop_errors"`
	Latency        *percentiles `json:"latency_ms"`
	Requests       int          `json:"open_loop_requests"`
	Errors         int          `json:"open_loop_errors"`
	PeakRSS        *float64     `json:"peak_rss_mib"`
	RSSOf          string       `json:"rss_of"`
	LastError      string       `json:"last_error,omitempty"`
	Note           string       `json:"note,omitempty"`
	Error          string       `json:"error,omitempty"`
}

// ratios compare riffle with the bare fan-out proxy measured in the same run.
type ratios struct {
	Throughput   float64     `json:"throughput_riffle_over_fanout"`
	LatencyDelta percentiles `json:"latency_riffle_minus_fanout_ms"`
}

// target is one of issue 6's targets with this run's figure.
type target struct {
	Name string   `json:"name"`
	Want string   `json:"want"`
	Got  *float64 `json:"got"`
	Pass *bool    `json:"pass"`
}

// newReport pools the modes' tallies into the report; now dates it.
func newReport(o options, rate int, modes []*mode, backRSS *float64, elapsed time.Duration, now time.Time) *report {
	from := "--rate"
	if o.rate == 0 {
		from = "half of fanout's closed-loop throughput"
	}
	r := &report{
		Date: now.UTC().Format(time.RFC3339), GoVersion: runtime.Version(),
		GOMAXPROCS: runtime.GOMAXPROCS(0), NumCPU: runtime.NumCPU(),
		LoadGenerator: "vegeta v12 in the parent process: closed loop with " + strconv.Itoa(o.concurrency) +
			" workers (rate 0), open loop at a constant rate",
		Settings: settings{Duration: o.duration.String(), Rounds: o.rounds, Concurrency: o.concurrency,
			Rate: rate, RateFrom: from, BackendLatency: o.latency.String(),
			BackendTimeout: o.timeout.String(), ItemsPerList: listLen},
		Modes: make(map[string]*modeReport, len(modes)), BackendsRSS: backRSS,
		Elapsed: elapsed.Seconds(),
	}
	for _, m := range modes {
		r.Modes[m.name] = m.report()
	}
	r.Ratios = compare(r.Modes["fanout"], r.Modes["riffle"])
	r.Targets = targets(r.Ratios, r.Modes["riffle"])
	return r
}

// report pools one mode's figures.
func (m *mode) report() *modeReport {
	mr := &modeReport{Note: m.note, RSSOf: "the proxy's child process (VmHWM)"}
	if m.name == "direct" {
		mr.RSSOf = "n/a: no proxy process; the backends' own process is backends_peak_rss_mib"
	}
	if m.err != nil {
		mr.Error = m.err.Error()
		return mr
	}
	if m.rss != nil {
		v := round(*m.rss, 2)
		mr.PeakRSS = &v
	}
	mr.Throughput = round(m.closed.throughput(), 1)
	mr.ClosedRequests, mr.ClosedErrors = m.closed.ok+m.closed.failed, m.closed.failed
	mr.Requests, mr.Errors = m.open.ok+m.open.failed, m.open.failed
	mr.LastError = m.open.lastError
	if mr.LastError == "" {
		mr.LastError = m.closed.lastError
	}
	if q, ok := quantiles(m.open.lat); ok {
		q = q.round()
		mr.Latency = &q
	}
	return mr
}

// compare returns riffle's figures against fanout's, or nil when either
// lacks them.
func compare(fan, rif *modeReport) *ratios {
	if fan == nil || rif == nil || fan.Latency == nil || rif.Latency == nil || fan.Throughput == 0 {
		return nil
	}
	f, g := fan.Latency, rif.Latency
	d := percentiles{P50: g.P50 - f.P50, P90: g.P90 - f.P90, P99: g.P99 - f.P99, P999: g.P999 - f.P999}
	return &ratios{Throughput: round(rif.Throughput/fan.Throughput, 4), LatencyDelta: d.round()}
}

// round rounds v to digits decimals, so the JSON carries no float noise
// below what the bench can measure.
func round(v float64, digits int) float64 {
	p := math.Pow(10, float64(digits))
	return math.Round(v*p) / p
}

// round rounds milliseconds to microseconds.
func (q percentiles) round() percentiles {
	return percentiles{P50: round(q.P50, 3), P90: round(q.P90, 3), P99: round(q.P99, 3), P999: round(q.P999, 3)}
}

// targets checks issue 6's targets: throughput ratio >= 0.75, p50 delta
// <= 0.3 ms, p99 delta <= 1.5 ms, riffle's peak RSS < 60 MiB.
func targets(r *ratios, rif *modeReport) []target {
	var thr, p50, p99, rss *float64
	if r != nil {
		thr, p50, p99 = &r.Throughput, &r.LatencyDelta.P50, &r.LatencyDelta.P99
	}
	if rif != nil {
		rss = rif.PeakRSS
	}
	return []target{
		check("throughput riffle/fanout", ">=", 0.75, thr),
		check("p50 riffle-fanout ms", "<=", 0.3, p50),
		check("p99 riffle-fanout ms", "<=", 1.5, p99),
		check("riffle peak RSS MiB", "<", 60, rss),
	}
}

// check compares got with limit under op; without a figure, Pass is nil.
func check(name, op string, limit float64, got *float64) target {
	t := target{Name: name, Want: op + " " + strconv.FormatFloat(limit, 'g', -1, 64)}
	if got == nil {
		return t
	}
	v := *got
	t.Got = &v
	var pass bool
	switch op {
	case ">=":
		pass = v >= limit
	case "<=":
		pass = v <= limit
	case "<":
		pass = v < limit
	}
	t.Pass = &pass
	return t
}

// writeJSON writes r as one indented JSON object.
func (r *report) writeJSON(w io.Writer) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	enc.SetEscapeHTML(false)
	if err := enc.Encode(r); err != nil {
		return fmt.Errorf("bench: write JSON: %w", err)
	}
	return nil
}

// writeTable writes r for people.
func (r *report) writeTable(w io.Writer) error {
	s := r.Settings
	fmt.Fprintf(w, "riffle-bench %s  %s  GOMAXPROCS %d  NumCPU %d\n", r.Date, r.GoVersion, r.GOMAXPROCS, r.NumCPU)
	fmt.Fprintf(w, "backends: %d items, %s latency; %s measured in %d rounds; closed loop %d workers; open loop %d req/s (%s)\n\n",
		s.ItemsPerList, s.BackendLatency, s.Duration, s.Rounds, s.Concurrency, s.Rate, s.RateFrom)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "mode\tthroughput req/s\tp50 ms\tp90 ms\tp99 ms\tp99.9 ms\terrors closed/open\tpeak RSS MiB\t")
	var notes []string
	for _, name := range modeNames() {
		m := r.Modes[name]
		if m == nil {
			continue
		}
		if m.Error != "" {
			fmt.Fprintf(tw, "%s\tfailed\t-\t-\t-\t-\t-\t-\t\n", name)
			notes = append(notes, name+": "+m.Error)
			continue
		}
		lat := [4]string{"-", "-", "-", "-"}
		if q := m.Latency; q != nil {
			lat = [4]string{ms(q.P50), ms(q.P90), ms(q.P99), ms(q.P999)}
		}
		rss := "n/a"
		if m.PeakRSS != nil {
			rss = strconv.FormatFloat(*m.PeakRSS, 'f', 1, 64)
		}
		fmt.Fprintf(tw, "%s\t%.0f\t%s\t%s\t%s\t%s\t%d/%d\t%s\t\n", name, m.Throughput,
			lat[0], lat[1], lat[2], lat[3], m.ClosedErrors, m.Errors, rss)
		if m.Note != "" {
			notes = append(notes, name+": "+m.Note)
		}
	}
	if err := tw.Flush(); err != nil {
		return fmt.Errorf("bench: write table: %w", err)
	}
	if r.BackendsRSS != nil {
		notes = append(notes, fmt.Sprintf("the backends' own process (serving every mode) peaked at %.1f MiB", *r.BackendsRSS))
	}
	for _, n := range notes {
		fmt.Fprintln(w, "  "+n)
	}
	return r.writeTargets(w)
}

// writeTargets writes the targets of issue 6 beside this run's figures.
func (r *report) writeTargets(w io.Writer) error {
	fmt.Fprintln(w, "\ntargets (issue 6), riffle against fanout in this run:")
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	for _, t := range r.Targets {
		got, verdict := "-", "no figure"
		if t.Got != nil {
			got = strconv.FormatFloat(*t.Got, 'f', 3, 64)
		}
		if t.Pass != nil {
			verdict = map[bool]string{true: "pass", false: "miss"}[*t.Pass]
		}
		fmt.Fprintf(tw, "  %s\t%s\t%s\t%s\n", t.Name, got, t.Want, verdict)
	}
	if err := tw.Flush(); err != nil {
		return fmt.Errorf("bench: write targets: %w", err)
	}
	return nil
}

// ms formats milliseconds with three decimals (microseconds).
func ms(v float64) string { return strconv.FormatFloat(v, 'f', 3, 64) }
