package proxy

import (
	"net"
	"net/http"
	"net/http/httptest"
	goruntime "runtime"
	"strings"
	"testing"
	"time"

	dto "github.com/prometheus/client_model/go"
)

// TestLoopAnswered508 points the incumbent at riffle itself through
// "localhost", the name the config check used to let through: one
// pass-through request then grew to 3,435 fds and 6,924 goroutines in a
// second. Now riffle marks what it forwards with a Via hop naming its
// pseudonym (RFC 9110 section 7.6.3) and answers a request that carries
// its own mark with 508 Loop Detected (RFC 5842 section 7.2): the client
// gets an answer at once, after one extra hop, on pass-through and on a
// route alike, and the goroutines come back down.
func TestLoopAnswered508(t *testing.T) {
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	_, port, _ := net.SplitHostPort(ln.Addr().String())
	self := "http://localhost:" + port
	cfg := testConfig(self, self)
	h := newHarness(t, cfg, Options{})
	front := httptest.NewUnstartedServer(h.srv.Handler())
	front.Listener.Close()
	front.Listener = ln
	front.Start()
	t.Cleanup(front.Close)
	before := goruntime.NumGoroutine()
	for _, path := range []string{"/v1/catalogue", "/v1/recommend"} {
		req, _ := http.NewRequest(http.MethodGet, front.URL+path, nil)
		req.Header.Set("Via", "1.1 edge-proxy")
		resp, err := h.client.Do(req)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if path == "/v1/catalogue" && resp.StatusCode != http.StatusLoopDetected {
			t.Errorf("pass-through through itself: %d, want 508", resp.StatusCode)
		}
		if path == "/v1/recommend" && resp.StatusCode != http.StatusBadGateway {
			t.Errorf("route through itself: %d, want 502 (the incumbent, riffle again, answered 508)", resp.StatusCode)
		}
	}
	if got := h.srv.m.loops; counterValue(t, got.(interface{ Write(*dto.Metric) error })) < 2 {
		t.Errorf("loops counted %v, want at least 2 (the pass-through, the route's incumbent call; its challenger call may be stopped first)", counterValue(t, got.(interface{ Write(*dto.Metric) error })))
	}
	deadline := time.Now().Add(5 * time.Second)
	for goruntime.NumGoroutine() > before+20 && time.Now().Before(deadline) {
		time.Sleep(10 * time.Millisecond)
	}
	if n := goruntime.NumGoroutine(); n > before+20 {
		t.Errorf("%d goroutines after the loop, %d before", n, before)
	}
}

// TestViaHop checks the Via field riffle sends: the client's hops kept,
// its own appended as "<protocol> <pseudonym>" (RFC 9110 section 7.6.3).
func TestViaHop(t *testing.T) {
	got := make(chan string, 2)
	inc := backendFunc(t, func(w http.ResponseWriter, r *http.Request) {
		got <- r.Header.Get("Via")
		w.Header().Set("Content-Type", "application/json")
		_, _ = w.Write([]byte(listBody("incumbent", skus("inc", 2)...)))
	})
	h := newHarness(t, testConfig(inc.URL, closedURL(t)), Options{})
	h.do(t, http.MethodGet, "/v1/catalogue", "", map[string]string{"Via": "1.0 edge"})
	via := <-got
	if !strings.HasPrefix(via, "1.0 edge, 1.1 riffle-") || !looped(http.Header{"Via": {via}}, h.srv.pseudonym) {
		t.Errorf("Via %q; want the client's hop then 1.1 %s", via, h.srv.pseudonym)
	}
}

func counterValue(t *testing.T, c interface{ Write(*dto.Metric) error }) float64 {
	t.Helper()
	var m dto.Metric
	if err := c.Write(&m); err != nil {
		t.Fatal(err)
	}
	return m.GetCounter().GetValue()
}
