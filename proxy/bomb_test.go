package proxy

import (
	"bytes"
	"compress/gzip"
	"fmt"
	"io"
	"net/http"
	"slices"
	"sync"
	"testing"
	"time"
)

// gzipBomb returns a gzip body of about 1 MB that inflates to size bytes
// of JSON-looking zeros (deflate codes a run of zeros in about 1/1000 of
// its length).
func gzipBomb(t testing.TB, size int) []byte {
	t.Helper()
	var buf bytes.Buffer
	zw, err := gzip.NewWriterLevel(&buf, gzip.BestCompression)
	if err != nil {
		t.Fatal(err)
	}
	_, _ = zw.Write([]byte(`{"items":["`))
	chunk := make([]byte, 1<<20)
	for i := range chunk {
		chunk[i] = '0'
	}
	for n := 0; n < size; n += len(chunk) {
		_, _ = zw.Write(chunk)
	}
	if err := zw.Close(); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

// TestGzipBombChallenger runs 50 concurrent shoppers against a healthy
// incumbent while the challenger answers every call with a gzip bomb (1 MB
// inflating to 1 GB), after the same load with a healthy challenger as the
// baseline of the same run. Before bodies were bounded while inflating,
// under the challenger's deadline and an in-flight budget, 40% of such
// requests failed with 502 "incumbent-timeout" and p99 passed a second.
// Now every request gets an answer, p99 stays within the incumbent's
// deadline plus 50 ms (a bound, not a speed target: the deadline is what a
// shopper may wait), and the bytes held by challenger bodies stay within
// backend_bytes_in_flight.
func TestGzipBombChallenger(t *testing.T) {
	if testing.Short() {
		t.Skip("load test skipped in -short mode")
	}
	bomb := gzipBomb(t, 1<<30)
	inc := jsonBackend(t, listBody("incumbent", skus("inc", 10)...))
	healthy := jsonBackend(t, listBody("challenger", skus("chal", 10)...))
	chal := backendFunc(t, func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Content-Type", "application/json")
		w.Header().Set("Content-Encoding", "gzip")
		_, _ = w.Write(bomb)
	})
	const deadline = 200 * time.Millisecond
	run := func(chalURL string) (load, *Server) {
		cfg := testConfig(inc.URL, chalURL)
		cfg.Incumbent.Timeout, cfg.Challenger.Timeout = deadline, deadline
		h := newHarness(t, cfg, Options{})
		// Shoppers keep their connections, as browsers do; net/http's
		// default of 2 idle per host would make most requests dial anew.
		h.client.Transport.(*http.Transport).MaxIdleConnsPerHost = 64
		return h.load(50, 10), h.srv
	}
	base, _ := run(healthy.URL)
	got, srv := run(chal.URL)
	t.Logf("healthy challenger: %v", base)
	t.Logf("gzip-bomb challenger: %v; peak challenger bytes in flight %d", got, srv.bodies.peak())
	if got.errors > 0 {
		t.Errorf("%d of %d requests failed (first: %s); want 0: a bad challenger must not fail live requests", got.errors, got.n, got.first)
	}
	if bound := deadline + 50*time.Millisecond; got.p99 > bound {
		t.Errorf("p99 %v, want within the incumbent's deadline plus 50 ms (%v)", got.p99, bound)
	}
	if peak, budget := srv.bodies.peak(), srv.bodies.limit.Load(); peak > budget+50*budgetStep {
		t.Errorf("backend bodies held %d bytes at once; challenger budget %d (+ one step for each incumbent call)", peak, budget)
	}
}

// load is what a run of concurrent GETs on the route saw.
type load struct {
	n, errors int
	p50, p99  time.Duration
	first     string // the first failure
}

func (l load) String() string {
	return fmt.Sprintf("%d requests, %d errors, p50 %v, p99 %v", l.n, l.errors, l.p50, l.p99)
}

// load sends each GETs from each of clients goroutines at once.
func (h *harness) load(clients, each int) load {
	var (
		mu  sync.Mutex
		lat []time.Duration
		l   load
		wg  sync.WaitGroup
	)
	for range clients {
		wg.Go(func() {
			for range each {
				start := time.Now()
				resp, err := h.client.Get(h.front.URL + "/v1/recommend")
				took := time.Since(start)
				if err == nil {
					_, _ = io.Copy(io.Discard, resp.Body)
					resp.Body.Close()
				}
				mu.Lock()
				lat = append(lat, took)
				if err != nil || resp.StatusCode != http.StatusOK {
					if l.errors++; l.first == "" {
						l.first = describe(resp, err)
					}
				}
				mu.Unlock()
			}
		})
	}
	wg.Wait()
	slices.Sort(lat)
	l.n, l.p50, l.p99 = len(lat), lat[len(lat)/2], lat[len(lat)*99/100]
	return l
}

func describe(resp *http.Response, err error) string {
	if err != nil {
		return err.Error()
	}
	return resp.Status + " " + resp.Header.Get("Content-Type")
}
