package main

import (
	"context"
	"fmt"
	"net/http"
	"slices"
	"sync/atomic"
	"time"

	vegeta "github.com/tsenart/vegeta/v12/lib"
	"gonum.org/v1/gonum/stat"
)

// shoppers is how many distinct shopper ids the load cycles through.
const shoppers = 4096

// maxOpenWorkers caps the goroutines vegeta may add in an open-loop attack
// when the target falls behind, so an overloaded mode cannot exhaust the
// machine.
const maxOpenWorkers = 1024

// tally is what one or more attacks on one mode measured.
type tally struct {
	ok, failed int
	elapsed    time.Duration
	lat        []float64 // milliseconds, successful requests only
	lastError  string
}

// add pools o into t.
func (t *tally) add(o tally) {
	t.ok += o.ok
	t.failed += o.failed
	t.elapsed += o.elapsed
	t.lat = append(t.lat, o.lat...)
	if o.lastError != "" {
		t.lastError = o.lastError
	}
}

// throughput is successful requests per second.
func (t *tally) throughput() float64 {
	if t.elapsed <= 0 {
		return 0
	}
	return float64(t.ok) / t.elapsed.Seconds()
}

// loader drives vegeta attacks at one mode. Its client, and so its idle
// connections, are kept across rounds.
type loader struct {
	base        string // the mode's base URL
	client      *http.Client
	target      vegeta.Targeter
	concurrency int
}

// newLoader returns a loader for the route under base.
func newLoader(base string, concurrency int) *loader {
	return &loader{
		base:        base,
		client:      &http.Client{Transport: newTransport(), Timeout: 5 * time.Second},
		target:      shopperTargeter(base + routePath + "?limit=20"),
		concurrency: concurrency,
	}
}

// closed runs a closed-loop attack for d: a fixed number of workers, each
// sending its next request as soon as the last one is answered (vegeta's
// rate 0 with max workers), so throughput is what the mode sustains.
func (l *loader) closed(ctx context.Context, d time.Duration) tally {
	n := uint64(l.concurrency)
	a := vegeta.NewAttacker(vegeta.Client(l.client), vegeta.Workers(n), vegeta.MaxWorkers(n), vegeta.MaxBody(0))
	return attack(ctx, a, l.target, vegeta.ConstantPacer{}, d, false)
}

// open runs an open-loop attack for d at a constant rate per second, each
// request sent on schedule whether or not earlier ones have been answered,
// and keeps every successful request's latency.
func (l *loader) open(ctx context.Context, rate int, d time.Duration) tally {
	a := vegeta.NewAttacker(vegeta.Client(l.client), vegeta.Workers(uint64(l.concurrency)),
		vegeta.MaxWorkers(maxOpenWorkers), vegeta.MaxBody(0))
	return attack(ctx, a, l.target, vegeta.ConstantPacer{Freq: rate, Per: time.Second}, d, true)
}

// attack runs one vegeta attack and tallies its results. A 2xx answer is a
// success; anything else, including transport errors, is a failure.
func attack(ctx context.Context, a *vegeta.Attacker, tr vegeta.Targeter, p vegeta.Pacer, d time.Duration, keep bool) tally {
	var t tally
	start := time.Now()
	results := a.Attack(tr, p, d, "")
	stop := context.AfterFunc(ctx, func() { a.Stop() })
	defer stop()
	for r := range results {
		if r.Error == "" && r.Code/100 == 2 {
			t.ok++
			if keep {
				t.lat = append(t.lat, float64(r.Latency)/float64(time.Millisecond))
			}
			continue
		}
		t.failed++
		t.lastError = r.Error
	}
	t.elapsed = time.Since(start)
	return t
}

// shopperTargeter returns a targeter for GET url that cycles through
// shopper ids, so the proxies see many users and many pairs of lists.
// Vegeta copies the header into each request, so the maps are shared.
func shopperTargeter(url string) vegeta.Targeter {
	headers := make([]http.Header, shoppers)
	for i := range headers {
		headers[i] = http.Header{shopperHeader: {fmt.Sprintf("shopper-%04d", i)}}
	}
	var n atomic.Uint64
	return func(t *vegeta.Target) error {
		i := n.Add(1)
		t.Method = http.MethodGet
		t.URL = url
		t.Header = headers[i%shoppers]
		return nil
	}
}

// percentiles are latency quantiles in milliseconds.
type percentiles struct {
	P50  float64 `json:"p50"`
	P90  float64 `json:"p90"`
	P99  float64 `json:"p99"`
	P999 float64 `json:"p999"`
}

// quantiles returns the empirical quantiles of lat (Hyndman & Fan 1996
// type 1, the inverse of the empirical distribution function, as gonum's
// stat.Empirical computes it). It sorts lat in place; ok is false when
// lat is empty.
func quantiles(lat []float64) (percentiles, bool) {
	if len(lat) == 0 {
		return percentiles{}, false
	}
	slices.Sort(lat)
	q := func(p float64) float64 { return stat.Quantile(p, stat.Empirical, lat, nil) }
	return percentiles{P50: q(0.5), P90: q(0.9), P99: q(0.99), P999: q(0.999)}, true
}
