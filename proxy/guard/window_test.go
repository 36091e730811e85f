package guard

import (
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/testutil"
	"gonum.org/v1/gonum/stat"
)

func TestLatencyGuardrailMatchesEmpiricalP99(t *testing.T) {
	const bound = 200 * time.Millisecond
	rng := rand.New(rand.NewPCG(7, 11))
	tests := []struct {
		name string
		gen  func(i int) time.Duration
	}{
		{name: "all fast", gen: func(int) time.Duration { return 10 * time.Millisecond }},
		{name: "exactly 1% slow", gen: func(i int) time.Duration {
			if i%100 == 0 {
				return 300 * time.Millisecond
			}
			return 10 * time.Millisecond
		}},
		{name: "2% slow", gen: func(i int) time.Duration {
			if i%50 == 0 {
				return 250 * time.Millisecond
			}
			return 10 * time.Millisecond
		}},
		{name: "slow calls land on the bound", gen: func(i int) time.Duration {
			if i%20 == 0 {
				return bound
			}
			return time.Millisecond
		}},
		{name: "lognormal around 60ms", gen: func(int) time.Duration {
			return time.Duration(60e6 * math.Exp(0.5*rng.NormFloat64()))
		}},
		{name: "lognormal around 90ms", gen: func(int) time.Duration {
			return time.Duration(90e6 * math.Exp(0.4*rng.NormFloat64()))
		}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			ds := make([]float64, 1000)
			for i := range ds {
				ds[i] = float64(tt.gen(i))
			}
			checkAgainstEmpiricalP99(t, bound, ds)
		})
	}
}

// checkAgainstEmpiricalP99 feeds the durations ds (in nanoseconds) to a
// guard with the given p99 bound and checks it trips exactly when gonum's
// empirical 99th percentile of ds is above the bound, quoting that
// percentile to within the histogram's resolution.
func checkAgainstEmpiricalP99(t *testing.T, bound time.Duration, ds []float64) {
	t.Helper()
	clk := newClock()
	g := New(Options{LatencyP99: bound, MinRequests: 100, Now: clk.Now})
	// Fed in ascending order, every prefix has a smaller share of slow
	// calls than the whole, so the guard trips during the feed exactly when
	// the whole set's p99 is above the bound.
	slices.Sort(ds)
	fed := 0
	for _, d := range ds {
		g.ObserveChallenger(time.Duration(d), nil)
		fed++
		if tripped, _ := g.Tripped(); tripped {
			break
		}
	}
	// Reference: gonum's empirical quantile, the smallest sample with at
	// least 99% of the samples at or below it.
	q := stat.Quantile(0.99, stat.Empirical, ds, nil)
	want := q > float64(bound)
	got := g.Check()
	if got != want {
		t.Fatalf("tripped = %v, want %v (gonum p99 %v, bound %v)", got, want, time.Duration(q), bound)
	}
	if !got {
		return
	}
	_, trip := g.Tripped()
	if trip.Guardrail != LatencyGuardrail {
		t.Errorf("guardrail = %q, want %q", trip.Guardrail, LatencyGuardrail)
	}
	// The reason quotes the p99 of the calls seen when it tripped: the
	// histogram bound at or above gonum's, less than one 2^(1/4) step
	// above it (window.go's resolution).
	q = stat.Quantile(0.99, stat.Empirical, ds[:fed], nil)
	est := quotedP99(t, trip.Reason)
	if est < time.Duration(q) || float64(est) > float64(q)*math.Exp2(0.25) {
		t.Errorf("quoted p99 %v, want within [%v, %v*2^(1/4)]", est, time.Duration(q), time.Duration(q))
	}
}

// quotedP99 pulls the "(p99 at most X)" duration out of a trip reason.
func quotedP99(t *testing.T, reason string) time.Duration {
	t.Helper()
	_, after, ok := strings.Cut(reason, "(p99 at most ")
	if !ok {
		t.Fatalf("reason %q quotes no p99", reason)
	}
	d, err := time.ParseDuration(strings.TrimSuffix(after, ")"))
	if err != nil {
		t.Fatalf("reason %q: %v", reason, err)
	}
	return d
}

func TestHistogramBounds(t *testing.T) {
	b := histogramBounds(0)
	if len(b) != histBounds || b[0] != int64(time.Millisecond) {
		t.Fatalf("got %d bounds starting %v, want 64 starting 1ms", len(b), time.Duration(b[0]))
	}
	for i := 1; i < len(b); i++ {
		if r := float64(b[i]) / float64(b[i-1]); math.Abs(r-math.Pow(2, 0.25)) > 1e-6 {
			t.Fatalf("bound %d / bound %d = %v, want 2^(1/4)", i, i-1, r)
		}
	}
	withBound := histogramBounds(150 * time.Millisecond)
	if !slices.IsSorted(withBound) || !slices.Contains(withBound, int64(150*time.Millisecond)) {
		t.Errorf("bound 150ms not inserted in order: %v", withBound)
	}
	w := newWindow(time.Minute, 0)
	for _, tt := range []struct {
		d    time.Duration
		want int
	}{{0, 0}, {time.Millisecond, 0}, {time.Millisecond + 1, 1}, {time.Hour, histBounds}} {
		if got := w.index(tt.d); got != tt.want {
			t.Errorf("index(%v) = %d, want %d", tt.d, got, tt.want)
		}
	}
}

func TestWindowShape(t *testing.T) {
	tests := []struct {
		span      time.Duration
		wantWidth time.Duration
		wantN     int
	}{
		{time.Minute, time.Second, 60},
		{30 * time.Second, time.Second, 30},
		{90 * time.Second, 2 * time.Second, 45},
		{10 * time.Minute, 10 * time.Second, 60},
		{500 * time.Millisecond, time.Second, 1},
	}
	for _, tt := range tests {
		w := newWindow(tt.span, 0)
		if time.Duration(w.width) != tt.wantWidth || len(w.buckets) != tt.wantN {
			t.Errorf("span %v: width %v, %d buckets; want %v, %d",
				tt.span, time.Duration(w.width), len(w.buckets), tt.wantWidth, tt.wantN)
		}
	}
}

func TestWindowDropsCallsOlderThanTheRing(t *testing.T) {
	w := newWindow(10*time.Second, 0)
	t0 := time.Unix(1_800_000_000, 0)
	if !w.add(t0.Add(10*time.Second), time.Millisecond, false) {
		t.Fatal("current call refused")
	}
	// t0 maps to the same ring slot, already reused for ten seconds later.
	if w.add(t0, time.Millisecond, true) {
		t.Error("call from a whole window ago was counted")
	}
	if c := w.sum(t0.Add(10 * time.Second)); c.calls != 1 || c.errors != 0 {
		t.Errorf("sum = %d calls, %d errors; want 1, 0", c.calls, c.errors)
	}
}

func TestConcurrentObserveLosesNoCall(t *testing.T) {
	clk := newClock()
	g := New(Options{ErrorRate: 0.99, MinRequests: math.MaxInt32, Now: clk.Now})
	const workers, each = 8, 2000
	var wg sync.WaitGroup
	for w := range workers {
		wg.Go(func() {
			for i := range each {
				if w == 0 && i%100 == 0 {
					clk.Advance(time.Second) // move across buckets meanwhile
				}
				g.ObserveChallenger(time.Millisecond, nil)
			}
		})
	}
	wg.Wait()
	if got := g.state.Load().win.sum(clk.Now()).calls; got != workers*each {
		t.Errorf("window holds %d calls, want %d", got, workers*each)
	}
}

func TestMetrics(t *testing.T) {
	reg := prometheus.NewPedanticRegistry()
	clk := newClock()
	g := New(Options{ErrorRate: 0.1, MinRequests: 10, Now: clk.Now, Registerer: reg})
	const before = `
# HELP riffle_guardrail_tripped 1 while the guardrail has halted the challenger (effective ramp 0), else 0.
# TYPE riffle_guardrail_tripped gauge
riffle_guardrail_tripped{guardrail="error-rate"} 0
riffle_guardrail_tripped{guardrail="latency-p99"} 0
riffle_guardrail_tripped{guardrail="losing"} 0
`
	if err := testutil.GatherAndCompare(reg, strings.NewReader(before), "riffle_guardrail_tripped"); err != nil {
		t.Error(err)
	}
	observe(g, 10, time.Millisecond, true)
	const after = `
# HELP riffle_guardrail_tripped 1 while the guardrail has halted the challenger (effective ramp 0), else 0.
# TYPE riffle_guardrail_tripped gauge
riffle_guardrail_tripped{guardrail="error-rate"} 1
riffle_guardrail_tripped{guardrail="latency-p99"} 0
riffle_guardrail_tripped{guardrail="losing"} 0
# HELP riffle_guardrail_trips_total Times the guardrail has tripped and halted the challenger.
# TYPE riffle_guardrail_trips_total counter
riffle_guardrail_trips_total{guardrail="error-rate"} 1
riffle_guardrail_trips_total{guardrail="latency-p99"} 0
riffle_guardrail_trips_total{guardrail="losing"} 0
`
	if err := testutil.GatherAndCompare(reg, strings.NewReader(after)); err != nil {
		t.Error(err)
	}
	g.Reset()
	if got := counterValue(t, reg, "riffle_guardrail_tripped", ErrorRateGuardrail); got != 0 {
		t.Errorf("tripped gauge after Reset = %v, want 0", got)
	}
	if got := counterValue(t, reg, "riffle_guardrail_trips_total", ErrorRateGuardrail); got != 1 {
		t.Errorf("trips_total after Reset = %v, want still 1", got)
	}
	problems, err := testutil.GatherAndLint(reg)
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range problems {
		t.Errorf("promlint: %s: %s", p.Metric, p.Text)
	}
}

// TestWindowHoldsItsSpan follows the window's documented shape: the
// window in force holds between Window minus one bucket width and Window
// of history. With a 10s window (ten 1s buckets) a call 9.0s old must be
// counted (9.0s is within 10s - 1s of history), and one 10.1s old must not.
func TestWindowHoldsItsSpan(t *testing.T) {
	w := newWindow(10*time.Second, 0)
	t0 := time.Unix(1_800_000_000, 0) // on a bucket boundary
	at := t0.Add(900 * time.Millisecond)
	if !w.add(at, time.Millisecond, true) {
		t.Fatal("call refused")
	}
	for _, tc := range []struct {
		age  time.Duration
		want uint64
	}{{0, 1}, {5 * time.Second, 1}, {9 * time.Second, 1}, {10*time.Second + 100*time.Millisecond, 0}} {
		if c := w.sum(at.Add(tc.age)); c.calls != tc.want || c.errors != tc.want {
			t.Errorf("a call %v old: window counts %d calls, %d errors; want %d", tc.age, c.calls, c.errors, tc.want)
		}
	}
}
