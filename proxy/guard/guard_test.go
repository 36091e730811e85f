package guard

import (
	"context"
	"errors"
	"math"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
)

// clock is a fake clock that tests move by hand.
type clock struct {
	mu sync.Mutex
	t  time.Time
}

func newClock() *clock { return &clock{t: time.Date(2026, 4, 1, 9, 0, 0, 0, time.UTC)} }

func (c *clock) Now() time.Time {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.t
}

func (c *clock) Advance(d time.Duration) {
	c.mu.Lock()
	defer c.mu.Unlock()
	c.t = c.t.Add(d)
}

var errBoom = errors.New("challenger: connection refused")

// observe feeds n calls of duration d, failed when fail is true.
func observe(g *Guard, n int, d time.Duration, fail bool) {
	var err error
	if fail {
		err = errBoom
	}
	for range n {
		g.ObserveChallenger(d, err)
	}
}

func TestErrorRateTripsAfterMinRequests(t *testing.T) {
	tests := []struct {
		name string
		// ok successes first, then failures one at a time.
		ok, maxFail int
		rate        float64
		min         int
		// wantAt is the failure that trips, 0 for none. Worked out from the
		// rule "errors > rate * calls once calls >= min": e.g. after 100
		// successes the k-th failure trips when k > 0.05*(100+k), k > 5.26.
		wantAt int
	}{
		{name: "threshold crossed after min requests", ok: 100, maxFail: 20, rate: 0.05, min: 100, wantAt: 6},
		{name: "failing from the start waits for min requests", ok: 0, maxFail: 150, rate: 0.05, min: 100, wantAt: 100},
		{name: "half failing under a 50% bound never trips", ok: 100, maxFail: 100, rate: 0.5, min: 100, wantAt: 0},
		{name: "rate exactly at the bound does not trip", ok: 90, maxFail: 10, rate: 0.1, min: 100, wantAt: 0},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			clk := newClock()
			g := New(Options{ErrorRate: tt.rate, MinRequests: tt.min, Now: clk.Now,
				Base: func(time.Time) float64 { return 0.4 }})
			observe(g, tt.ok, 20*time.Millisecond, false)
			gotAt := 0
			for k := 1; k <= tt.maxFail; k++ {
				observe(g, 1, 20*time.Millisecond, true)
				if tripped, _ := g.Tripped(); tripped {
					gotAt = k
					break
				}
			}
			if gotAt != tt.wantAt {
				t.Fatalf("tripped at failure %d, want %d", gotAt, tt.wantAt)
			}
			wantRamp := 0.4
			if tt.wantAt > 0 {
				wantRamp = 0
				_, trip := g.Tripped()
				if trip.Guardrail != ErrorRateGuardrail || !trip.At.Equal(clk.Now()) {
					t.Errorf("trip = %+v, want guardrail %q at %v", trip, ErrorRateGuardrail, clk.Now())
				}
				if !strings.Contains(trip.Reason, "error-rate bound") {
					t.Errorf("reason %q does not say which bound", trip.Reason)
				}
			}
			if got := g.Ramp(clk.Now()); got != wantRamp {
				t.Errorf("Ramp = %v, want %v", got, wantRamp)
			}
		})
	}
}

func TestWindowSlides(t *testing.T) {
	tests := []struct {
		name    string
		advance time.Duration
		want    bool
	}{
		// 60 failures, then 100 successes: 60/160 = 37.5% > 30% while the
		// failures are in the window; none once they have slid out.
		{name: "failures inside the window", advance: 30 * time.Second, want: true},
		{name: "failures slid out of the window", advance: 61 * time.Second, want: false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			clk := newClock()
			g := New(Options{ErrorRate: 0.3, MinRequests: 100, Window: time.Minute, Now: clk.Now})
			observe(g, 60, time.Millisecond, true)
			clk.Advance(tt.advance)
			observe(g, 100, time.Millisecond, false)
			if got := g.Check(); got != tt.want {
				t.Errorf("Check = %v, want %v", got, tt.want)
			}
		})
	}
}

func TestLosingGuardrail(t *testing.T) {
	clk := newClock()
	losing := false
	g := New(Options{Now: clk.Now, Losing: func() (bool, string) {
		return losing, "always-valid p = 0.0004 for the incumbent"
	}})
	if g.Check() {
		t.Fatal("tripped while Losing says false")
	}
	losing = true
	if !g.Check() {
		t.Fatal("not tripped while Losing says true")
	}
	_, trip := g.Tripped()
	want := Trip{Guardrail: LosingGuardrail, Reason: "always-valid p = 0.0004 for the incumbent", At: clk.Now()}
	if trip != want {
		t.Errorf("trip = %+v, want %+v", trip, want)
	}
	if got := g.Ramp(clk.Now()); got != 0 {
		t.Errorf("Ramp = %v, want 0", got)
	}
}

func TestResetRestoresBaseRamp(t *testing.T) {
	clk := newClock()
	g := New(Options{ErrorRate: 0.1, MinRequests: 10, Now: clk.Now,
		Base: func(now time.Time) float64 { return 0.25 }})
	observe(g, 10, time.Millisecond, true)
	if got := g.Ramp(clk.Now()); got != 0 {
		t.Fatalf("Ramp after failures = %v, want 0", got)
	}
	g.Reset()
	if tripped, trip := g.Tripped(); tripped {
		t.Fatalf("still tripped after Reset: %+v", trip)
	}
	if got := g.Ramp(clk.Now()); got != 0.25 {
		t.Errorf("Ramp after Reset = %v, want the base 0.25", got)
	}
	// The failures that tripped it were cleared with it.
	if g.Check() {
		t.Error("Check re-tripped on the calls from before the reset")
	}
}

func TestSetOptionsClearsTripAndApplies(t *testing.T) {
	clk := newClock()
	g := New(Options{ErrorRate: 0.1, MinRequests: 10, Now: clk.Now})
	observe(g, 10, time.Millisecond, true)
	if tripped, _ := g.Tripped(); !tripped {
		t.Fatal("not tripped before reload")
	}
	g.SetOptions(Options{ErrorRate: 0.9, MinRequests: 10})
	if tripped, _ := g.Tripped(); tripped {
		t.Fatal("SetOptions did not clear the trip")
	}
	observe(g, 10, time.Millisecond, true) // 100% > 90%
	if tripped, _ := g.Tripped(); !tripped {
		t.Error("the reloaded bound did not apply")
	}
	g.SetOptions(Options{}) // every guardrail off
	observe(g, 200, time.Millisecond, true)
	if g.Check() {
		t.Error("tripped with every guardrail disabled")
	}
}

func TestRampClamped(t *testing.T) {
	tests := []struct {
		base, want float64
	}{{0.3, 0.3}, {1.5, 1}, {-0.2, 0}, {math.NaN(), 0}, {1, 1}, {0, 0}}
	for _, tt := range tests {
		g := New(Options{Base: func(time.Time) float64 { return tt.base }})
		if got := g.Ramp(time.Time{}); got != tt.want {
			t.Errorf("Base %v: Ramp = %v, want %v", tt.base, got, tt.want)
		}
	}
	if got := New(Options{}).Ramp(time.Time{}); got != 1 {
		t.Errorf("nil Base: Ramp = %v, want 1", got)
	}
}

func TestRunChecksUntilCancelled(t *testing.T) {
	var mu sync.Mutex
	losing := false
	g := New(Options{Interval: 2 * time.Millisecond, Losing: func() (bool, string) {
		mu.Lock()
		defer mu.Unlock()
		return losing, "significantly worse"
	}})
	ctx, cancel := context.WithCancel(t.Context())
	done := make(chan struct{})
	go func() { g.Run(ctx); close(done) }()
	mu.Lock()
	losing = true
	mu.Unlock()
	deadline := time.Now().Add(5 * time.Second)
	for tripped, _ := g.Tripped(); !tripped; tripped, _ = g.Tripped() {
		if time.Now().After(deadline) {
			t.Fatal("Run did not trip the losing guardrail within 5s")
		}
		time.Sleep(time.Millisecond)
	}
	cancel()
	select {
	case <-done:
	case <-time.After(5 * time.Second):
		t.Fatal("Run did not return after its context ended")
	}
}

func TestTwoGuardsShareOneRegistry(t *testing.T) {
	reg := prometheus.NewPedanticRegistry()
	a := New(Options{Registerer: reg, Losing: func() (bool, string) { return true, "x" }})
	New(Options{Registerer: reg})
	a.Check()
	if got := counterValue(t, reg, "riffle_guardrail_trips_total", LosingGuardrail); got != 1 {
		t.Errorf("trips_total{losing} = %v, want 1", got)
	}
}

func counterValue(t *testing.T, g prometheus.Gatherer, name, guardrail string) float64 {
	t.Helper()
	mfs, err := g.Gather()
	if err != nil {
		t.Fatal(err)
	}
	for _, mf := range mfs {
		if mf.GetName() != name {
			continue
		}
		for _, m := range mf.GetMetric() {
			if m.GetLabel()[0].GetValue() == guardrail {
				if c := m.GetCounter(); c != nil {
					return c.GetValue()
				}
				return m.GetGauge().GetValue()
			}
		}
	}
	t.Fatalf("no %s{guardrail=%q}", name, guardrail)
	return 0
}
