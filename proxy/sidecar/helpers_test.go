package sidecar_test

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"log/slog"
	"net/http"
	"net/http/httptest"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"riffle/proxy/config"
	"riffle/proxy/sidecar"
)

// The invented garden-supply catalogue: the incumbent ranks one shelf and
// the challenger another, so that an item's SKU tells which list supplied
// it without looking at the store.
var (
	incumbentShelf = []string{
		"GS-0001 Bamboo cane bundle", "GS-0002 Terracotta pot 20cm", "GS-0003 Hazel pea sticks",
		"GS-0004 Jute twine reel", "GS-0005 Copper plant labels", "GS-0006 Seed tray, deep",
		"GS-0007 Horticultural grit 5kg", "GS-0008 Willow obelisk", "GS-0009 Kneeling pad", "GS-0010 Pruning saw",
	}
	challengerShelf = []string{
		"GS-0101 Rain chain, brass", "GS-0102 Wormery starter", "GS-0103 Leaf mould sacks",
		"GS-0104 Cloche, glass bell", "GS-0105 Comfrey root cuttings", "GS-0106 Hori-hori knife",
		"GS-0107 Cold frame, cedar", "GS-0108 Dibber, oak", "GS-0109 Bulb planter", "GS-0110 Watering rose, fine",
	}
)

// isChallengerItem reports whether sku is on the challenger's shelf.
func isChallengerItem(sku string) bool { return strings.HasPrefix(sku, "GS-01") }

// shelfBody renders a backend answer: the ranked list under /items with a
// field beside it that the merged answer must keep.
func shelfBody(model string, shelf []string) []byte {
	type item struct {
		SKU   string  `json:"sku"`
		Name  string  `json:"name"`
		Price float64 `json:"price"`
	}
	doc := struct {
		Model string `json:"model"`
		Items []item `json:"items"`
	}{Model: model}
	for i, s := range shelf {
		sku, name, _ := strings.Cut(s, " ")
		doc.Items = append(doc.Items, item{SKU: sku, Name: name, Price: 3.5 + float64(i)})
	}
	b, _ := json.Marshal(doc)
	return b
}

// backend is a loopback model server. It counts its calls, can be made to
// fail with 500, can be slowed, and answers 500 to a request whose query
// has fail=<its name>.
type backend struct {
	*httptest.Server
	name    string
	hits    atomic.Int64
	fail    atomic.Bool
	delay   time.Duration
	onStart func(r *http.Request) // called as a request arrives, if set
	onEnd   func(r *http.Request) // called as its answer is written, if set
}

// newBackend starts a backend answering shelf, slowed by delay, closed
// when the test ends.
func newBackend(t *testing.T, name string, shelf []string, delay time.Duration) *backend {
	b := &backend{name: name, delay: delay}
	body := shelfBody(name, shelf)
	b.Server = httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		b.hits.Add(1)
		if b.onStart != nil {
			b.onStart(r)
		}
		if b.onEnd != nil {
			defer b.onEnd(r)
		}
		if b.delay > 0 {
			select {
			case <-time.After(b.delay):
			case <-r.Context().Done():
				return
			}
		}
		if b.fail.Load() || r.URL.Query().Get("fail") == b.name {
			http.Error(w, `{"error":"model server overloaded"}`, http.StatusInternalServerError)
			return
		}
		w.Header().Set("Content-Type", "application/json")
		_, _ = w.Write(body)
	}))
	t.Cleanup(b.Close)
	return b
}

// downURL returns the URL of a loopback server that has been closed, so
// that nothing answers there.
func downURL(t *testing.T) string {
	t.Helper()
	s := httptest.NewServer(http.NotFoundHandler())
	u := s.URL
	s.Close()
	return u
}

// conf is the config a test runs on; yaml renders it.
type conf struct {
	Incumbent, Challenger string // base URLs
	Store                 string
	Ramp                  float64
	Window                time.Duration // experiment.window; 0 = 1m
	Grace                 time.Duration // shutdown_grace; 0 = default
	Timeout               time.Duration // both backends' timeout; 0 = 2s
	Listen                string        // 0 = 127.0.0.1:0
	List                  string        // routes[0].list; "" = /items
	Guardrails            string        // the experiment.guardrails flow mapping, if any
	TokenFile             string        // admin_token_file, if any
}

// yaml renders c as riffle.yaml.
func (c conf) yaml() string {
	window, timeout, listen, list := c.Window, c.Timeout, c.Listen, c.List
	if window == 0 {
		window = time.Minute
	}
	if timeout == 0 {
		timeout = 2 * time.Second
	}
	if listen == "" {
		listen = "127.0.0.1:0"
	}
	if list == "" {
		list = "/items"
	}
	var b strings.Builder
	fmt.Fprintf(&b, "listen: %s\nadmin: 127.0.0.1:0\nstore: %s\n", listen, c.Store)
	if c.Grace > 0 {
		fmt.Fprintf(&b, "shutdown_grace: %s\n", c.Grace)
	}
	if c.TokenFile != "" {
		fmt.Fprintf(&b, "admin_token_file: %s\n", c.TokenFile)
	}
	fmt.Fprintf(&b, "incumbent: {url: %q, timeout: %s}\n", c.Incumbent, timeout)
	fmt.Fprintf(&b, "challenger: {url: %q, timeout: %s}\n", c.Challenger, timeout)
	fmt.Fprintf(&b, "routes:\n  - {path: /v1/recommend, list: %q, id: /sku}\n", list)
	b.WriteString("user: {header: Shopper-Id}\n")
	fmt.Fprintf(&b, "experiment:\n  name: spring-refresh\n  policy: team-draft\n  ramp: %v\n  window: %s\n", c.Ramp, window)
	b.WriteString("  events: {click: 1, purchase: 3}\n")
	if c.Guardrails != "" {
		fmt.Fprintf(&b, "  guardrails: %s\n", c.Guardrails)
	}
	return b.String()
}

// newConf returns a conf for the two backends with its store in dir.
func newConf(dir string, inc, chal string) conf {
	return conf{Incumbent: inc, Challenger: chal, Store: filepath.Join(dir, "riffle.db"), Ramp: 1}
}

// writeFile puts text at path by writing a sibling file and renaming it
// over path, as editors and config-management tools do, so that a reader
// never sees half a file.
func writeFile(t *testing.T, path, text string) {
	t.Helper()
	tmp := path + ".new"
	if err := os.WriteFile(tmp, []byte(text), 0o600); err != nil {
		t.Fatalf("write %s: %v", tmp, err)
	}
	if err := os.Rename(tmp, path); err != nil {
		t.Fatalf("rename %s: %v", tmp, err)
	}
}

// logBuffer collects the sidecar's log; it is shown when a test fails.
type logBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

// Write appends p.
func (l *logBuffer) Write(p []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.Write(p)
}

// String returns everything written so far.
func (l *logBuffer) String() string {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.b.String()
}

// running is a sidecar serving in the test process.
type running struct {
	*sidecar.Sidecar
	path string // the config file
	data string // http://data-plane
	adm  string // http://admin
	log  *logBuffer
}

// start writes c to a config file in dir, loads it through config.Load and
// runs the sidecar until the test ends, when it must shut down cleanly.
func start(t *testing.T, dir string, c conf) *running {
	t.Helper()
	path := filepath.Join(dir, "riffle.yaml")
	writeFile(t, path, c.yaml())
	cfg, err := config.Load(path)
	if err != nil {
		t.Fatalf("config.Load(%s): %v\n%s", path, err, c.yaml())
	}
	logs := &logBuffer{}
	s, err := sidecar.Start(path, cfg, slog.New(slog.NewTextHandler(logs, nil)))
	if err != nil {
		t.Fatalf("sidecar.Start: %v", err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan error, 1)
	go func() { done <- s.Run(ctx) }()
	r := &running{Sidecar: s, path: path, data: "http://" + s.DataAddr(), adm: "http://" + s.AdminAddr(), log: logs}
	t.Cleanup(func() {
		cancel()
		select {
		case err := <-done:
			if err != nil {
				t.Errorf("Run returned %v after shutdown, want nil", err)
			}
		case <-time.After(15 * time.Second):
			t.Errorf("Run did not return within 15s of the end of its context")
		}
		if t.Failed() {
			t.Logf("sidecar log:\n%s", logs.String())
		}
	})
	return r
}

// eventually polls cond every 20ms until it holds or timeout passes, then
// fails the test with cond's last explanation.
func eventually(t *testing.T, timeout time.Duration, cond func() (bool, string)) {
	t.Helper()
	deadline := time.Now().Add(timeout)
	for {
		ok, why := cond()
		if ok {
			return
		}
		if time.Now().After(deadline) {
			t.Fatalf("not within %s: %s", timeout, why)
		}
		time.Sleep(20 * time.Millisecond)
	}
}

// labels is shorthand for a label set.
type labels = map[string]string
