package status

import (
	"strings"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
)

func TestHistoryRingKeepsNewestInOrder(t *testing.T) {
	h := NewHistory(3)
	t0 := time.Unix(1000, 0)
	for i := range 5 {
		h.Add(Point{Time: t0.Add(time.Duration(i) * time.Second), Delta: float64(i)})
	}
	got := h.Points()
	if len(got) != 3 {
		t.Fatalf("got %d points, want 3", len(got))
	}
	for i, want := range []float64{2, 3, 4} {
		if got[i].Delta != want {
			t.Errorf("point %d: delta %v, want %v", i, got[i].Delta, want)
		}
	}
}

// TestQuantileInterpolatesInsideTheBucket checks the estimate against the
// rule Prometheus documents for histogram_quantile (linear interpolation
// inside the bucket holding the rank), worked by hand.
func TestQuantileInterpolatesInsideTheBucket(t *testing.T) {
	bounds := []float64{0.1, 0.2, 0.5}
	cum := []float64{10, 30, 40}
	for _, c := range []struct{ q, want float64 }{
		{0.5, 0.15},   // rank 20: 0.1 + 0.1 * (20-10)/20
		{0.25, 0.1},   // rank 10: the top of the first bucket
		{0.9, 0.38},   // rank 36: 0.2 + 0.3 * (36-30)/10
		{0.125, 0.05}, // rank 5: 0 + 0.1 * 5/10
	} {
		if got := quantile(c.q, bounds, cum, 40); got < c.want-1e-12 || got > c.want+1e-12 {
			t.Errorf("quantile(%v) = %v, want %v", c.q, got, c.want)
		}
	}
}

// TestMeterReadsIntervals checks that Latency covers only the calls since
// its previous call, on a real registry.
func TestMeterReadsIntervals(t *testing.T) {
	reg := prometheus.NewRegistry()
	h := prometheus.NewHistogramVec(prometheus.HistogramOpts{Name: metricBackendLatency, Buckets: []float64{0.001, 0.01, 0.1}}, []string{"backend"})
	reg.MustRegister(h)
	m := NewMeter(reg)
	for range 100 {
		h.WithLabelValues("challenger").Observe(0.05)
	}
	lat, err := m.Latency()
	if err != nil {
		t.Fatal(err)
	}
	if q := lat["challenger"]; q.Calls != 100 || q.P50 < 0.01 || q.P50 > 0.1 {
		t.Errorf("first interval %+v, want 100 calls with p50 in (0.01, 0.1]", q)
	}
	for range 10 {
		h.WithLabelValues("challenger").Observe(0.0005)
	}
	lat, _ = m.Latency()
	if q := lat["challenger"]; q.Calls != 10 || q.P99 > 0.001 {
		t.Errorf("second interval %+v, want 10 calls with p99 at most 0.001", q)
	}
	if lat, _ = m.Latency(); len(lat) != 0 {
		t.Errorf("an interval without calls gave %v, want no backend", lat)
	}
}

// TestPaletteInStyleSheet keeps style.css's colours equal to palette.go's.
func TestPaletteInStyleSheet(t *testing.T) {
	css := StyleSheet()
	for name, hex := range map[string]string{"incumbent": ColorIncumbent, "challenger": ColorChallenger, "tie": ColorTie,
		"band": ColorBand, "delta": ColorDelta, "alarm": ColorAlarm, "neutral": ColorNeutral} {
		if want := "--" + name + ": " + hex + ";"; !strings.Contains(css, want) {
			t.Errorf("style.css lacks %q", want)
		}
	}
}
