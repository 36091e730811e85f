package guard

import (
	"testing"
	"time"
)

// BenchmarkObserveChallenger measures the per-call cost the proxy pays on
// every challenger request, from parallel goroutines as under load.
func BenchmarkObserveChallenger(b *testing.B) {
	for _, bc := range []struct {
		name string
		now  func() time.Time
	}{
		{name: "wall-clock", now: time.Now},
		{name: "fixed-clock", now: newClock().Now},
	} {
		b.Run(bc.name, func(b *testing.B) {
			g := New(Options{ErrorRate: 0.5, LatencyP99: time.Second, MinRequests: 100, Now: bc.now})
			b.ReportAllocs()
			b.RunParallel(func(pb *testing.PB) {
				d := 3 * time.Millisecond
				for pb.Next() {
					g.ObserveChallenger(d, nil)
					d += time.Microsecond
					if d > 400*time.Millisecond {
						d = 3 * time.Millisecond
					}
				}
			})
		})
	}
}

// BenchmarkCheck measures one periodic evaluation of a full one-minute window.
func BenchmarkCheck(b *testing.B) {
	clk := newClock()
	g := New(Options{ErrorRate: 0.5, LatencyP99: time.Second, MinRequests: 100, Now: clk.Now})
	for range 60 {
		observe(g, 100, 5*time.Millisecond, false)
		clk.Advance(time.Second)
	}
	b.ReportAllocs()
	for b.Loop() {
		g.Check()
	}
}
