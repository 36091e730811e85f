package main

import (
	"context"
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"time"
)

// options are the bench's settings from the command line.
type options struct {
	duration    time.Duration // measuring time over all modes and phases
	rate        int           // open-loop rate; 0 = half of fanout's saturation
	concurrency int           // closed-loop workers
	latency     time.Duration // backends' fixed latency
	timeout     time.Duration // proxies' per-backend deadline
	rounds      int
	profile     string // directory for the proxies' profiles; "" = none
	jsonOut     bool
}

// Shares of the measuring time: closed loop first (its fanout figure sets
// the open-loop rate), then open loop, which needs more samples for p99.9.
const (
	closedShare = 0.4
	openShare   = 0.6
)

// modeNames returns the three modes in their round order.
func modeNames() []string { return []string{"direct", "fanout", "riffle"} }

// mode is one thing under load: the incumbent directly or a proxy child.
type mode struct {
	name   string
	proc   *child // nil for direct
	load   *loader
	err    error // why the mode is out of the run, if it is
	note   string
	closed tally
	open   tally
	rss    *float64 // peak RSS in MiB, nil when not known
}

// bench runs the whole benchmark: children, pre-flight, warm-up, the
// closed-loop rounds, the open-loop rounds, peak RSS, shutdown. exe is the
// bench binary, re-executed for each child role; now is the clock that
// dates the report and times the run; progress lines go to logw.
func bench(ctx context.Context, o options, exe string, now func() time.Time, logw io.Writer) (*report, error) {
	began := now()
	progress := func(format string, args ...any) {
		fmt.Fprintf(logw, "riffle-bench: %5.1fs "+format+"\n", append([]any{now().Sub(began).Seconds()}, args...)...)
	}
	progress("starting the backends")
	wait := 30 * time.Second
	be, err := startChild(ctx, exe, "backends", []string{"-latency", o.latency.String()}, wait)
	if err != nil {
		return nil, err
	}
	defer be.stop(10 * time.Second)
	if len(be.urls) != 2 {
		return nil, fmt.Errorf("bench: backends child gave %d URLs, want 2: %w", len(be.urls), errChild)
	}
	progress("starting the fanout and riffle proxies")
	modes := startModes(ctx, o, exe, be.urls[0], be.urls[1], wait)
	defer stopModes(modes, nil)
	for _, m := range modes {
		if m.err == nil {
			m.err = preflight(ctx, m, be.urls[0], 10*time.Second)
		}
	}
	if err := modes[1].err; err != nil {
		return nil, fmt.Errorf("bench: the fanout mode sets the open-loop rate and failed: %w", err)
	}
	rate := o.rate
	phases(ctx, o, modes, &rate, progress)
	if err := ctx.Err(); err != nil {
		return nil, fmt.Errorf("bench: interrupted: %w", err)
	}
	readPeaks(modes)
	var backRSS *float64
	if v, err := be.peakRSS(); err == nil {
		backRSS = &v
	}
	progress("stopping")
	stopModes(modes, progress)
	end := now()
	progress("done")
	return newReport(o, rate, modes, backRSS, end.Sub(began), end), nil
}

// startModes starts the two proxy children; a failed start takes that
// mode out of the run with its reason.
func startModes(ctx context.Context, o options, exe, incumbent, challenger string, wait time.Duration) []*mode {
	names := modeNames()
	modes := make([]*mode, len(names))
	for i, name := range names {
		m := &mode{name: name}
		modes[i] = m
		base := incumbent
		if name != "direct" {
			args := []string{"-incumbent", incumbent, "-challenger", challenger, "-timeout", o.timeout.String()}
			if o.profile != "" {
				args = append(args, "-profile", o.profile)
			}
			if m.proc, m.err = startChild(ctx, exe, name, args, wait); m.err != nil {
				continue
			}
			base = m.proc.urls[0]
		}
		m.load = newLoader(base, o.concurrency)
	}
	return modes
}

// readPeaks reads each measured proxy child's peak RSS.
func readPeaks(modes []*mode) {
	for _, m := range modes {
		if m.proc == nil || m.err != nil {
			continue
		}
		if v, err := m.proc.peakRSS(); err == nil {
			m.rss = &v
		} else {
			m.addNote(err.Error())
		}
	}
}

// addNote appends a remark to the mode's note.
func (m *mode) addNote(s string) {
	if m.note != "" {
		m.note += "; "
	}
	m.note += s
}

// stopModes drops the load clients' idle connections and stops every
// proxy child still running; a bad exit becomes part of the mode's note.
// It may be called more than once.
func stopModes(modes []*mode, progress func(string, ...any)) {
	for _, m := range modes {
		if m.load != nil {
			m.load.client.CloseIdleConnections()
		}
		if m.proc == nil {
			continue
		}
		if progress != nil {
			progress("stopping %s", m.name)
		}
		if err := m.proc.stop(15 * time.Second); err != nil && m.err == nil {
			m.addNote(err.Error())
		}
		m.proc = nil
	}
}

// phases warms every live mode up, then runs the closed-loop rounds and
// the open-loop rounds. Round k starts with mode k mod 3, so no mode always
// runs first or last in a round, and drift hits all alike. When *rate is 0
// it is set to half of fanout's pooled closed-loop throughput.
func phases(ctx context.Context, o options, modes []*mode, rate *int, progress func(string, ...any)) {
	per := time.Duration(len(modes) * o.rounds)
	closedSlice := (time.Duration(float64(o.duration)*closedShare) / per).Round(time.Millisecond)
	openSlice := (time.Duration(float64(o.duration)*openShare) / per).Round(time.Millisecond)
	warm := min(300*time.Millisecond, o.duration/20)
	progress("warming up for %v per mode", warm)
	for _, m := range live(modes) {
		m.load.closed(ctx, warm)
	}
	each := func(f func(m *mode)) {
		for k := range o.rounds {
			for i := range modes {
				if m := modes[(k+i)%len(modes)]; m.err == nil && ctx.Err() == nil {
					f(m)
				}
			}
		}
	}
	progress("closed loop: %d rounds of %v per mode, %d workers", o.rounds, closedSlice, o.concurrency)
	each(func(m *mode) { m.closed.add(m.load.closed(ctx, closedSlice)) })
	if *rate == 0 {
		*rate = max(1, int(modes[1].closed.throughput()/2))
	}
	progress("open loop: %d rounds of %v per mode at %d req/s", o.rounds, openSlice, *rate)
	each(func(m *mode) { m.open.add(m.load.open(ctx, *rate, openSlice)) })
}

// live returns the modes still in the run.
func live(modes []*mode) []*mode {
	var out []*mode
	for _, m := range modes {
		if m.err == nil {
			out = append(out, m)
		}
	}
	return out
}

// preflight sends one request to a mode and checks the answer is a 200
// with a whole list. For riffle it also notes a missing impression header,
// and an answer with no item outside the incumbent's list (a sign that
// nothing was interleaved). It retries for up to wait.
func preflight(ctx context.Context, m *mode, incumbent string, wait time.Duration) error {
	got, header, err := fetchRetry(ctx, m.load.client, m.load.base, wait)
	if err != nil {
		return fmt.Errorf("bench: %s pre-flight: %w", m.name, err)
	}
	if m.name != "riffle" {
		return nil
	}
	if header.Get("Riffle-Impression") == "" {
		m.addNote("answer lacks the Riffle-Impression header")
	}
	inc, _, err := fetchRetry(ctx, m.load.client, incumbent, wait)
	if err != nil {
		return fmt.Errorf("bench: %s pre-flight, incumbent's list: %w", m.name, err)
	}
	seen := make(map[string]bool, len(inc.Items))
	for _, it := range inc.Items {
		seen[it.SKU] = true
	}
	foreign := 0
	for _, it := range got.Items {
		if !seen[it.SKU] {
			foreign++
		}
	}
	if foreign == 0 {
		m.addNote("pre-flight answer held the incumbent's items only")
	}
	return nil
}

// fetchRetry is fetch, tried again every 100ms for up to wait: on a busy
// machine a first request can miss a 200ms backend deadline.
func fetchRetry(ctx context.Context, c *http.Client, base string, wait time.Duration) (*answer, http.Header, error) {
	deadline := time.Now().Add(wait)
	for {
		a, h, err := fetch(ctx, c, base)
		if err == nil || time.Now().After(deadline) || ctx.Err() != nil {
			return a, h, err
		}
		select {
		case <-ctx.Done():
		case <-time.After(100 * time.Millisecond):
		}
	}
}

// fetch GETs the route under base for one shopper and decodes the answer.
func fetch(ctx context.Context, c *http.Client, base string) (*answer, http.Header, error) {
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, base+routePath+"?limit=20", nil)
	if err != nil {
		return nil, nil, err
	}
	req.Header.Set(shopperHeader, "shopper-0001")
	resp, err := c.Do(req)
	if err != nil {
		return nil, nil, err
	}
	defer resp.Body.Close()
	body, err := io.ReadAll(io.LimitReader(resp.Body, maxBody))
	if err != nil {
		return nil, nil, fmt.Errorf("read answer: %w", err)
	}
	if resp.StatusCode != http.StatusOK {
		return nil, nil, fmt.Errorf("%w: status %s: %.200s", errAnswer, resp.Status, body)
	}
	var a answer
	if err := json.Unmarshal(body, &a); err != nil {
		return nil, nil, fmt.Errorf("%w: %w", errAnswer, err)
	}
	if len(a.Items) != listLen {
		return nil, nil, fmt.Errorf("%w: %d items, want %d", errAnswer, len(a.Items), listLen)
	}
	return &a, resp.Header, nil
}
