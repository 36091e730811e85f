package proxy

import (
	"bufio"
	"fmt"
	"net"
	"net/http"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"riffle/proxy/feedback"
	"riffle/store"
)

// TestSlowBodyCutOff sends request bodies at a byte every 100 ms, as a
// slowloris client does, on a route, on POST /feedback and on
// pass-through. Such connections used to stay open for as long as the
// client kept trickling (still open after 45 s, 1,000 held); with
// read_body_timeout 500ms each gets a 408 and the connection is closed
// well inside 3 s (a bound with slack, not a speed target).
func TestSlowBodyCutOff(t *testing.T) {
	if testing.Short() {
		t.Skip("slow-client test skipped in -short mode")
	}
	inc := jsonBackend(t, listBody("incumbent", skus("inc", 3)...))
	chal := jsonBackend(t, listBody("challenger", skus("chal", 3)...))
	st, err := store.Open(filepath.Join(t.TempDir(), "riffle.db"), &store.Options{FinalizeEvery: -1})
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { _ = st.Close() })
	cfg := testConfig(inc.URL, chal.URL)
	cfg.ReadBodyTimeout = 500 * time.Millisecond
	h := newHarness(t, cfg, Options{Feedback: feedback.New(st, feedback.Options{})})
	for _, path := range []string{"/v1/recommend", "/feedback", "/v1/catalogue/sync"} {
		t.Run(strings.TrimPrefix(path, "/"), func(t *testing.T) {
			t.Parallel()
			status, took := slowPost(t, h.front.Listener.Addr().String(), path, 3*time.Second)
			if status != http.StatusRequestTimeout {
				t.Errorf("POST %s with a trickling body: status %d after %v; want 408 within 3s", path, status, took)
			}
		})
	}
}

// slowPost announces a 100-byte body and sends it a byte every 100 ms,
// and returns the status of the answer and when it came (0 if none came
// within limit).
func slowPost(t *testing.T, addr, path string, limit time.Duration) (int, time.Duration) {
	t.Helper()
	conn, err := net.Dial("tcp", addr)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close()
	start := time.Now()
	fmt.Fprintf(conn, "POST %s HTTP/1.1\r\nHost: riffle\r\nContent-Type: application/json\r\nContent-Length: 100\r\n\r\n{", path)
	answered := make(chan int, 1)
	go func() {
		_ = conn.SetReadDeadline(start.Add(limit))
		resp, err := http.ReadResponse(bufio.NewReader(conn), nil)
		if err != nil {
			answered <- 0
			return
		}
		resp.Body.Close()
		answered <- resp.StatusCode
	}()
	tick := time.NewTicker(100 * time.Millisecond)
	defer tick.Stop()
	for {
		select {
		case status := <-answered:
			return status, time.Since(start)
		case <-tick.C:
			_, _ = conn.Write([]byte(" "))
		}
	}
}
