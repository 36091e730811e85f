package main

import (
	"bytes"
	"context"
	"encoding/json"
	"io"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"sync"
	"testing"
	"time"

	"riffle/store"
)

// lockedBuffer is a bytes.Buffer safe for the server's logger and the
// test to share.
type lockedBuffer struct {
	mu      sync.Mutex
	b       bytes.Buffer
	changed chan struct{} // closed by the next Write; nil until awaited
}

func (l *lockedBuffer) Write(p []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	if l.changed != nil {
		close(l.changed)
		l.changed = nil
	}
	return l.b.Write(p)
}

// await returns the first match of re in what was written, waiting for
// writes until it appears or timeout passes (then nil).
func (l *lockedBuffer) await(re *regexp.Regexp, timeout time.Duration) []string {
	deadline := time.NewTimer(timeout)
	defer deadline.Stop()
	for {
		l.mu.Lock()
		if m := re.FindStringSubmatch(l.b.String()); m != nil {
			l.mu.Unlock()
			return m
		}
		if l.changed == nil {
			l.changed = make(chan struct{})
		}
		changed := l.changed
		l.mu.Unlock()
		select {
		case <-changed:
		case <-deadline.C:
			return nil
		}
	}
}

func (l *lockedBuffer) String() string {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.String()
}

// fixture reads a file of the repository's top-level testdata.
func fixture(t *testing.T, name string) []byte {
	t.Helper()
	b, err := os.ReadFile(filepath.Join("..", "..", "testdata", name))
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// TestServeEndToEnd runs `riffle serve` on the top-level testdata fixtures:
// two model servers answering recorded lists, one recommendation request,
// feedback on it, then a graceful stop; the store must hold the impression
// and the accepted events.
func TestServeEndToEnd(t *testing.T) {
	if testing.Short() {
		t.Skip("end-to-end test skipped in -short mode")
	}
	backend := func(body []byte) *httptest.Server {
		s := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
			w.Header().Set("Content-Type", "application/json")
			_, _ = w.Write(body)
		}))
		t.Cleanup(s.Close)
		return s
	}
	inc, chal := backend(fixture(t, "incumbent.json")), backend(fixture(t, "challenger.json"))
	dir := t.TempDir()
	dbPath := filepath.Join(dir, "riffle.db")
	cfg := strings.NewReplacer("INCUMBENT_URL", inc.URL, "CHALLENGER_URL", chal.URL, "STORE_PATH", dbPath).Replace(string(fixture(t, "riffle.yaml")))
	cfgPath := filepath.Join(dir, "riffle.yaml")
	if err := os.WriteFile(cfgPath, []byte(cfg), 0o600); err != nil {
		t.Fatal(err)
	}

	ctx, stop := context.WithCancel(context.Background())
	var logs lockedBuffer
	exit := make(chan int, 1)
	go func() { exit <- run(ctx, []string{"serve", "--config", cfgPath}, io.Discard, &logs) }()
	defer stop()
	listen := regexp.MustCompile(`msg="riffle serving" listen=(\S+)`)
	m := logs.await(listen, 10*time.Second)
	if m == nil {
		t.Fatalf("riffle serve did not start within 10s: %s", logs.String())
	}
	addr := m[1]

	req, _ := http.NewRequest(http.MethodGet, "http://"+addr+"/v1/recommend?context=GS-1001", nil)
	req.Header.Set("Shopper-Id", "shopper-0042")
	resp, err := http.DefaultClient.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	var page struct {
		Model string `json:"model"`
		Items []struct {
			SKU string `json:"sku"`
		} `json:"items"`
	}
	err = json.NewDecoder(resp.Body).Decode(&page)
	resp.Body.Close()
	imp := resp.Header.Get("Riffle-Impression")
	if err != nil || resp.StatusCode != 200 || imp == "" {
		t.Fatalf("recommend: status %d, impression %q, decode %v", resp.StatusCode, imp, err)
	}
	if page.Model != "popularity-v7" || len(page.Items) != 6 {
		t.Fatalf("merged answer: model %q with %d items; want the incumbent's document with 6 slots", page.Model, len(page.Items))
	}

	clicked := page.Items[1].SKU
	body := strings.NewReplacer("IMPRESSION", imp, "CLICKED", clicked).Replace(string(fixture(t, "feedback.ndjson")))
	resp, err = http.Post("http://"+addr+"/feedback", "application/x-ndjson", strings.NewReader(body))
	if err != nil {
		t.Fatal(err)
	}
	var ack struct {
		Accepted int `json:"accepted"`
		Rejected []struct {
			Line  int    `json:"line"`
			Error string `json:"error"`
		} `json:"rejected"`
	}
	_ = json.NewDecoder(resp.Body).Decode(&ack)
	resp.Body.Close()
	if resp.StatusCode != http.StatusAccepted || ack.Accepted != 2 || len(ack.Rejected) != 1 || ack.Rejected[0].Line != 3 {
		t.Fatalf("feedback: status %d, %+v; want 202 with 2 accepted and line 3 rejected", resp.StatusCode, ack)
	}

	stop()
	select {
	case code := <-exit:
		if code != 0 {
			t.Fatalf("riffle serve exited %d: %s", code, logs.String())
		}
	case <-time.After(15 * time.Second):
		t.Fatal("riffle serve did not stop within 15s")
	}
	st, err := store.Open(dbPath, &store.Options{ReadOnly: true})
	if err != nil {
		t.Fatal(err)
	}
	defer st.Close()
	var out bytes.Buffer
	if err := st.Export(context.Background(), &out, time.Time{}); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(out.String(), imp) || strings.Count(out.String(), `"event":"`) != 2 {
		t.Errorf("store after shutdown lacks the impression or its 2 events: %s", out.String())
	}
}
