package proxy

import (
	"bytes"
	"compress/gzip"
	"context"
	"errors"
	"fmt"
	"net/http"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/testutil"
	"github.com/prometheus/client_golang/prometheus/testutil/promlint"

	dto "github.com/prometheus/client_model/go"

	"riffle/proxy/config"
)

func gzipBackend(t *testing.T, body string, sawGzip *atomic.Bool) string {
	return backendFunc(t, func(w http.ResponseWriter, r *http.Request) {
		if !strings.Contains(r.Header.Get("Accept-Encoding"), "gzip") {
			w.Write([]byte(body))
			return
		}
		sawGzip.Store(true)
		var b bytes.Buffer
		zw := gzip.NewWriter(&b)
		zw.Write([]byte(body))
		zw.Close()
		w.Header().Set("Content-Type", "application/json; charset=utf-8")
		w.Header().Set("Content-Encoding", "gzip")
		w.Header().Set("Content-Length", fmt.Sprint(b.Len()))
		w.Write(b.Bytes())
	}).URL
}

func TestGzipBackends(t *testing.T) {
	var incGz, chalGz atomic.Bool
	cfg := testConfig(gzipBackend(t, listBody("incumbent", skus("rake", 10)...), &incGz),
		gzipBackend(t, listBody("challenger", skus("hose", 10)...), &chalGz))
	h := newHarness(t, cfg, Options{})
	// The client offers br: riffle must not pass that on, since it has to
	// read the list.
	rep := h.do(t, "GET", "/v1/recommend", "", map[string]string{"Accept-Encoding": "br"})
	if !incGz.Load() || !chalGz.Load() {
		t.Fatalf("backends were not asked for gzip")
	}
	if rep.status != 200 || rep.header.Get("Content-Encoding") != "" {
		t.Fatalf("status %d, Content-Encoding %q; want 200 and a decoded body", rep.status, rep.header.Get("Content-Encoding"))
	}
	if got := len(servedItems(t, rep.body)); got != 10 {
		t.Errorf("merged %d items, want 10", got)
	}
	if cl := rep.header.Get("Content-Length"); cl != fmt.Sprint(len(rep.body)) {
		t.Errorf("Content-Length %s, body %d bytes", cl, len(rep.body))
	}
	if ct := rep.header.Get("Content-Type"); ct != "application/json; charset=utf-8" {
		t.Errorf("Content-Type %q, want the incumbent's", ct)
	}
	if im := h.sink.last(t); !im.Interleaved() {
		t.Errorf("fallback %q, want interleaved", im.Fallback)
	}
}

type observer struct {
	mu   sync.Mutex
	errs []error
}

func (o *observer) ObserveChallenger(d time.Duration, err error) {
	o.mu.Lock()
	defer o.mu.Unlock()
	o.errs = append(o.errs, err)
}

func (o *observer) seen() []error {
	o.mu.Lock()
	defer o.mu.Unlock()
	return append([]error(nil), o.errs...)
}

func TestObserverAndLastReached(t *testing.T) {
	var fail atomic.Bool
	chal := backendFunc(t, func(w http.ResponseWriter, r *http.Request) {
		if fail.Load() {
			http.Error(w, "no", http.StatusServiceUnavailable)
			return
		}
		w.Write([]byte(listBody("c", "x")))
	})
	obs := &observer{}
	h := newHarness(t, testConfig(jsonBackend(t, listBody("i", "a")).URL, chal.URL), Options{Observer: obs})
	if inc, ch := h.srv.LastReached(); !inc.IsZero() || !ch.IsZero() {
		t.Errorf("LastReached before any request = %v, %v; want zero times", inc, ch)
	}
	before := time.Now()
	h.do(t, "GET", "/v1/recommend", "", nil)
	fail.Store(true)
	h.do(t, "GET", "/v1/recommend", "", nil)
	if inc, ch := h.srv.LastReached(); inc.Before(before) || ch.Before(before) {
		t.Errorf("LastReached = %v, %v; want both after %v", inc, ch, before)
	}
	if errs := obs.seen(); len(errs) != 2 || errs[0] != nil || !errors.Is(errs[1], ErrStatus) {
		t.Errorf("observed %v, want [nil, an ErrStatus]", errs)
	}
}

func TestMetrics(t *testing.T) {
	reg := prometheus.NewRegistry()
	half := 0.5
	cfg := testConfig(jsonBackend(t, listBody("i", "a", "b")).URL, jsonBackend(t, `{"items":[{"sku":"c"},{"name":"no id"}]}`).URL)
	cfg.Experiment.Ramp = &half
	h := newHarness(t, cfg, Options{Registerer: reg})
	interleaved, outside := 0, 0
	for i := range 20 {
		h.do(t, "GET", "/v1/recommend", "", map[string]string{"Shopper-Id": fmt.Sprint("m", i)})
		if h.sink.last(t).Interleaved() {
			interleaved++
		} else {
			outside++
		}
	}
	h.do(t, "POST", "/v1/recommend", strings.Repeat("x", 2<<20), nil)
	want := fmt.Sprintf(`
# HELP riffle_experiment_ramp_ratio Effective ramp: the share of users who get interleaved lists.
# TYPE riffle_experiment_ramp_ratio gauge
riffle_experiment_ramp_ratio{experiment="spring-refresh"} 0.5
# HELP riffle_proxy_dropped_elements_total List elements dropped because they had no identity at the route's id pointer.
# TYPE riffle_proxy_dropped_elements_total counter
riffle_proxy_dropped_elements_total{backend="challenger"} %d
riffle_proxy_dropped_elements_total{backend="incumbent"} 0
`, interleaved)
	if err := testutil.GatherAndCompare(reg, strings.NewReader(want), "riffle_experiment_ramp_ratio", "riffle_proxy_dropped_elements_total"); err != nil {
		t.Error(err)
	}
	for _, c := range []struct {
		labels []string
		want   int
	}{
		{[]string{"/v1/recommend", "interleaved", "none"}, interleaved},
		{[]string{"/v1/recommend", "incumbent-only", "ramp"}, outside},
		{[]string{"/v1/recommend", "failed", "request-too-large"}, 1},
		{[]string{"/v1/recommend", "incumbent-only", "challenger-timeout"}, 0},
	} {
		if got := testutil.ToFloat64(h.srv.m.requests.WithLabelValues(c.labels...)); got != float64(c.want) {
			t.Errorf("riffle_proxy_requests_total%v = %v, want %d", c.labels, got, c.want)
		}
	}
	if n := testutil.CollectAndCount(h.srv.m.duration); n != 1 {
		t.Errorf("%d request-duration series, want 1", n)
	}
	if got := testutil.ToFloat64(h.srv.m.backendErr.WithLabelValues("challenger", "timeout")); got != 0 {
		t.Errorf("challenger timeouts = %v, want 0", got)
	}
	problems, err := promlint.NewWithMetricFamilies(gather(t, reg)).Lint()
	if err != nil || len(problems) > 0 {
		t.Errorf("promlint: %v %v", problems, err)
	}
}

func gather(t *testing.T, g prometheus.Gatherer) []*dto.MetricFamily {
	t.Helper()
	mfs, err := g.Gather()
	if err != nil {
		t.Fatal(err)
	}
	return mfs
}

func TestApplySwapsAndKeepsOldOnError(t *testing.T) {
	inc, chal := jsonBackend(t, listBody("i", "a", "b")).URL, jsonBackend(t, listBody("c", "c", "d")).URL
	h := newHarness(t, testConfig(inc, chal), Options{})
	bad := []struct {
		name string
		edit func(c *config.Config)
	}{
		{"list pointer", func(c *config.Config) { c.Routes[0].List = "items" }},
		{"id pointer", func(c *config.Config) { c.Routes[0].ID = "/a~2" }},
		{"backend url", func(c *config.Config) { c.Challenger.URL = "ftp://x" }},
		{"policy", func(c *config.Config) { c.Experiment.Policy = "coin-toss" }},
		{"ramp", func(c *config.Config) { r := 1.5; c.Experiment.Ramp = &r }},
		{"mode", func(c *config.Config) { c.OnIncumbentFailure = "retry" }},
		{"chi pattern", func(c *config.Config) { c.Routes[0].Path = "/v1/{id:[}" }},
	}
	for _, tt := range bad {
		cfg := testConfig(inc, chal)
		tt.edit(cfg)
		if err := h.srv.Apply(cfg); !errors.Is(err, ErrConfig) {
			t.Errorf("%s: Apply error = %v, want ErrConfig", tt.name, err)
		}
	}
	if rep := h.do(t, "GET", "/v1/recommend", "", nil); rep.status != 200 || !h.sink.last(t).Interleaved() {
		t.Fatalf("after rejected configs the old one must serve: status %d fallback %q", rep.status, h.sink.last(t).Fallback)
	}
	next := testConfig(inc, chal)
	next.Routes[0].Path = "/v2/recommend"
	next.Experiment.Policy = "balanced"
	if err := h.srv.Apply(next); err != nil {
		t.Fatalf("Apply: %v", err)
	}
	h.do(t, "GET", "/v2/recommend", "", nil)
	if im := h.sink.last(t); im.Policy != "balanced" {
		t.Errorf("policy after Apply = %q, want balanced", im.Policy)
	}
	if rep := h.do(t, "GET", "/v1/recommend", "", nil); rep.header.Get(ImpressionHeader) != "" {
		t.Errorf("the old route is still interleaved after Apply")
	}
}

// TestApplyUnderLoad changes the ramp while requests run: none fails, and
// the change takes effect.
func TestApplyUnderLoad(t *testing.T) {
	inc, chal := jsonBackend(t, listBody("i", "a", "b")).URL, jsonBackend(t, listBody("c", "c")).URL
	h := newHarness(t, testConfig(inc, chal), Options{})
	var wg sync.WaitGroup
	var failures atomic.Int64
	served := make(chan struct{}, 64) // one token per completed request, while there is room
	stop := make(chan struct{})
	for range 4 {
		wg.Go(func() {
			for {
				select {
				case <-stop:
					return
				default:
				}
				req, _ := http.NewRequest("GET", h.front.URL+"/v1/recommend", nil)
				resp, err := h.client.Do(req)
				if err != nil || resp.StatusCode != 200 {
					failures.Add(1)
				}
				if resp != nil {
					resp.Body.Close()
				}
				select {
				case served <- struct{}{}:
				default:
				}
			}
		})
	}
	for i := range 20 {
		cfg := testConfig(inc, chal)
		r := float64(i%2) * 1.0
		cfg.Experiment.Ramp = &r
		if err := h.srv.Apply(cfg); err != nil {
			t.Fatal(err)
		}
		// Let eight more requests complete before the next Apply, so
		// traffic runs across every change (a count, not a sleep: a slow
		// machine just takes longer).
		for len(served) > 0 {
			<-served
		}
		for range 8 {
			select {
			case <-served:
			case <-time.After(10 * time.Second):
				t.Fatalf("no request completed within 10s of reload %d", i)
			}
		}
	}
	close(stop)
	wg.Wait()
	if n := failures.Load(); n != 0 {
		t.Errorf("%d requests failed during reloads, want 0", n)
	}
	// The last applied ramp is 1: everything is interleaved from here on.
	h.do(t, "GET", "/v1/recommend", "", nil)
	if im := h.sink.last(t); !im.Interleaved() {
		t.Errorf("after the last reload (ramp 1) fallback = %q, want interleaved", im.Fallback)
	}
}

// TestClientGoneIsNoBackendError: a client that hangs up cancels both
// calls; that is counted as client-gone, not as backend errors, and the
// guardrails are not told of it.
func TestClientGoneIsNoBackendError(t *testing.T) {
	arrived := make(chan struct{}, 2)
	slow := func(w http.ResponseWriter, r *http.Request) {
		arrived <- struct{}{}
		select {
		case <-time.After(3 * time.Second):
		case <-r.Context().Done():
		}
	}
	reg := prometheus.NewRegistry()
	obs := &observer{}
	h := newHarness(t, testConfig(backendFunc(t, slow).URL, backendFunc(t, slow).URL), Options{Observer: obs, Registerer: reg})
	ctx, hangUp := context.WithCancel(context.Background())
	go func() { // hang up once both backends are working on the request
		<-arrived
		<-arrived
		hangUp()
	}()
	req, _ := http.NewRequestWithContext(ctx, "GET", h.front.URL+"/v1/recommend", nil)
	if resp, err := h.client.Do(req); err == nil {
		resp.Body.Close()
		t.Fatal("the client's request was not cancelled")
	}
	gone := h.srv.m.requests.WithLabelValues("/v1/recommend", "failed", "client-gone")
	for deadline := time.Now().Add(2 * time.Second); testutil.ToFloat64(gone) == 0 && time.Now().Before(deadline); {
		time.Sleep(5 * time.Millisecond)
	}
	if got := testutil.ToFloat64(gone); got != 1 {
		t.Fatalf("client-gone requests = %v, want 1", got)
	}
	for _, b := range []string{"incumbent", "challenger"} {
		for _, k := range []string{"timeout", "connect", "status", "body"} {
			if v := testutil.ToFloat64(h.srv.m.backendErr.WithLabelValues(b, k)); v != 0 {
				t.Errorf("%s %s errors = %v, want 0", b, k, v)
			}
		}
	}
	if errs := obs.seen(); len(errs) != 0 {
		t.Errorf("observer told %v, want nothing", errs)
	}
}
