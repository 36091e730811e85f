package main

import (
	"bytes"
	"errors"
	"flag"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"
	"time"
)

var update = flag.Bool("update", false, "rewrite the golden files in testdata")

// TestQuantiles checks the percentiles against the definition of Hyndman
// & Fan (1996), "Sample quantiles in statistical packages", The American
// Statistician 50(4), type 1: Q(p) is the ceil(n p)-th smallest value. With
// the values 1..1001 (in shuffled order) and n p never an integer, that is
// ceil(1001 p) itself.
func TestQuantiles(t *testing.T) {
	lat := make([]float64, 1001)
	for i := range lat {
		lat[i] = float64(i + 1)
	}
	rand.New(rand.NewPCG(1, 2)).Shuffle(len(lat), func(i, j int) { lat[i], lat[j] = lat[j], lat[i] })
	got, ok := quantiles(lat)
	want := percentiles{
		P50:  math.Ceil(1001 * 0.5),   // 501
		P90:  math.Ceil(1001 * 0.9),   // 901
		P99:  math.Ceil(1001 * 0.99),  // 991
		P999: math.Ceil(1001 * 0.999), // 1000
	}
	if !ok || got != want {
		t.Errorf("got %+v, %v; want %+v", got, ok, want)
	}
	if _, ok := quantiles(nil); ok {
		t.Errorf("quantiles(nil): got ok, want not ok")
	}
}

func TestTally(t *testing.T) {
	var pooled tally
	pooled.add(tally{ok: 300, failed: 1, elapsed: time.Second, lat: []float64{1}, lastError: "EOF"})
	pooled.add(tally{ok: 100, elapsed: time.Second, lat: []float64{2, 3}})
	if got := pooled.throughput(); got != 200 {
		t.Errorf("throughput: got %v, want 400 successes / 2 s = 200", got)
	}
	if pooled.failed != 1 || len(pooled.lat) != 3 || pooled.lastError != "EOF" {
		t.Errorf("pooled: got %+v, want 1 failure, 3 latencies, last error EOF", pooled)
	}
	if got := (&tally{ok: 5}).throughput(); got != 0 {
		t.Errorf("no elapsed time: got %v, want 0", got)
	}
}

// TestTargets checks each target of issue 6 at and beside its limit:
// throughput ratio >= 0.75, p50 delta <= 0.3 ms, p99 delta <= 1.5 ms,
// peak RSS < 60 MiB.
func TestTargets(t *testing.T) {
	tests := []struct {
		name               string
		thr, p50, p99, rss float64
		want               [4]bool
	}{
		{"at the limits", 0.75, 0.3, 1.5, 59.9, [4]bool{true, true, true, true}},
		{"just beyond", 0.7499, 0.3001, 1.5001, 60, [4]bool{false, false, false, false}},
		{"faster than fanout", 1.1, -0.2, -1, 12, [4]bool{true, true, true, true}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			r := &ratios{Throughput: tt.thr, LatencyDelta: percentiles{P50: tt.p50, P99: tt.p99}}
			got := targets(r, &modeReport{PeakRSS: &tt.rss})
			for i, tg := range got {
				if tg.Pass == nil || *tg.Pass != tt.want[i] {
					t.Errorf("%s (%s): got pass %v, want %v", tg.Name, tg.Want, tg.Pass, tt.want[i])
				}
			}
		})
	}
	for _, tg := range targets(nil, nil) {
		if tg.Got != nil || tg.Pass != nil {
			t.Errorf("no figures: %s got %v pass %v, want both nil", tg.Name, tg.Got, tg.Pass)
		}
	}
}

func TestCompare(t *testing.T) {
	fan := &modeReport{Throughput: 2000, Latency: &percentiles{P50: 5.5, P90: 6, P99: 8, P999: 12}}
	rif := &modeReport{Throughput: 1500, Latency: &percentiles{P50: 5.75, P90: 6.5, P99: 9, P999: 15}}
	got := compare(fan, rif)
	want := &ratios{Throughput: 0.75, LatencyDelta: percentiles{P50: 0.25, P90: 0.5, P99: 1, P999: 3}}
	if got == nil || *got != *want {
		t.Errorf("got %+v, want %+v", got, want)
	}
	if got := compare(fan, &modeReport{Error: "failed"}); got != nil {
		t.Errorf("riffle without figures: got %+v, want nil", got)
	}
}

// fixedReport builds a report from invented tallies, pinned to one date
// and machine so that its rendering can be compared with golden files.
func fixedReport(riffleErr error) *report {
	lat := func(base float64) []float64 {
		out := make([]float64, 1000)
		for i := range out {
			out[i] = base + float64(i)/100
		}
		return out
	}
	rss := func(v float64) *float64 { return &v }
	modes := []*mode{
		{name: "direct", closed: tally{ok: 8000, elapsed: 2 * time.Second}, open: tally{ok: 1000, elapsed: time.Second, lat: lat(5)}},
		{name: "fanout", closed: tally{ok: 5000, elapsed: 2 * time.Second}, open: tally{ok: 1000, elapsed: time.Second, lat: lat(5.2)}, rss: rss(17.25)},
		{name: "riffle", closed: tally{ok: 4200, failed: 2, elapsed: 2 * time.Second, lastError: "EOF"},
			open: tally{ok: 1000, elapsed: time.Second, lat: lat(5.4)}, rss: rss(31.5)},
	}
	modes[2].err = riffleErr
	o := options{duration: 40 * time.Second, concurrency: 32, latency: 5 * time.Millisecond, timeout: 200 * time.Millisecond, rounds: 4}
	r := newReport(o, 1250, modes, rss(40), 43*time.Second, time.Date(2026, 5, 4, 9, 30, 0, 0, time.UTC))
	r.GoVersion, r.GOMAXPROCS, r.NumCPU = "go1.26", 2, 2
	return r
}

func TestReportGolden(t *testing.T) {
	tests := []struct {
		file string
		r    *report
		json bool
	}{
		{"table.golden", fixedReport(nil), false},
		{"table-riffle-failed.golden", fixedReport(errors.New("sidecar: not assembled yet")), false},
		{"report.golden.json", fixedReport(nil), true},
	}
	for _, tt := range tests {
		t.Run(tt.file, func(t *testing.T) {
			var buf bytes.Buffer
			var err error
			if tt.json {
				err = tt.r.writeJSON(&buf)
			} else {
				err = tt.r.writeTable(&buf)
			}
			if err != nil {
				t.Fatal(err)
			}
			golden(t, tt.file, buf.Bytes())
		})
	}
}

func golden(t *testing.T, name string, got []byte) {
	t.Helper()
	path := filepath.Join("testdata", name)
	if *update {
		if err := os.WriteFile(path, got, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test -update to create it)", err)
	}
	if !bytes.Equal(got, want) {
		t.Errorf("%s differs (go test -update rewrites it):\ngot:\n%s\nwant:\n%s", path, got, want)
	}
}
