package sidecar

import (
	"context"
	"fmt"
	"io"
	"sync"
	"time"

	"riffle/proxy/config"
	"riffle/proxy/status"
	"riffle/store"
	"riffle/store/breakdown"
)

// positionsSpan is how far back the status page's click and purchase rates
// by position reach, and positionsEvery how often they are re-read: they
// come from a scan of the store's export, bounded by the span.
const (
	positionsSpan  = time.Hour
	positionsEvery = 30 * time.Second
)

// statusPage feeds the live status page: a point per status sample, with
// the backends' latency over the interval, and live.json.
type statusPage struct {
	meter   *status.Meter
	store   store.Reader
	current func() *config.Config

	mu    sync.Mutex
	pos   *breakdown.Breakdown
	since time.Time
	at    time.Time
	err   error
}

// point turns a status into a history point.
func (p *statusPage) point(st Status, now time.Time) status.Point {
	pt := status.Point{Time: now, Delta: st.Delta, CSDelta: st.CSDelta, CI: st.CI, PValue: st.PValue,
		Verdict: string(st.Verdict), Impressions: st.Impressions, Interleaved: st.Interleaved,
		WithFeedback: st.WithFeedback, Open: max(0, st.Interleaved-st.WithFeedback-st.NoFeedback)}
	if st.Ramp != nil {
		pt.Ramp = *st.Ramp
	}
	if lat, err := p.meter.Latency(); err == nil && len(lat) > 0 {
		pt.Latency = lat
	}
	if tot, err := p.meter.Totals(); err == nil {
		for _, n := range tot.Events {
			pt.Events += n
		}
	}
	return pt
}

// live returns live.json's body.
func (p *statusPage) live(ctx context.Context) status.Live {
	cfg := p.current()
	l := status.Live{Window: cfg.Experiment.Window.String()}
	tot, err := p.meter.Totals()
	l.Totals = tot
	if err != nil {
		l.Problem = fmt.Sprintf("metrics: %v", err)
	}
	pos, since, err := p.positions(ctx, cfg.Experiment.Name)
	if err != nil {
		l.Problem = fmt.Sprintf("positions: %v", err)
		return l
	}
	l.Positions, l.PositionsSince = pos.Positions, &since
	return l
}

// positions returns the breakdown of the last hour's impressions, re-read
// at most every positionsEvery.
func (p *statusPage) positions(ctx context.Context, experiment string) (*breakdown.Breakdown, time.Time, error) {
	p.mu.Lock()
	defer p.mu.Unlock()
	now := time.Now()
	if p.at.IsZero() || now.Sub(p.at) >= positionsEvery || (p.pos != nil && p.pos.Experiment != experiment) {
		since := now.Add(-positionsSpan).UTC()
		p.pos, p.err = readBreakdown(ctx, p.store, experiment, since)
		p.since, p.at = since, now
	}
	return p.pos, p.since, p.err
}

// readBreakdown scans the store's export of impressions served since.
func readBreakdown(ctx context.Context, st store.Reader, experiment string, since time.Time) (*breakdown.Breakdown, error) {
	pr, pw := io.Pipe()
	go func() { pw.CloseWithError(st.Export(ctx, pw, since)) }()
	b, err := breakdown.Read(pr, experiment)
	_ = pr.CloseWithError(io.ErrClosedPipe)
	if err == nil {
		err = ctx.Err()
	}
	return b, err
}
