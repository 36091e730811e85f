package proxy

import (
	"encoding/json"
	"fmt"
	"io"
	"net"
	"net/http"
	"net/http/httptest"
	"strings"
	"sync"
	"testing"
	"time"

	"riffle/merge"
	"riffle/proxy/config"
	"riffle/store"
)

// gardenItem renders one invented catalogue entry of about 200 bytes.
func gardenItem(sku string) string {
	return fmt.Sprintf(`{"sku":%q,"name":"Garden item %s","price":12.5,"stock":40,`+
		`"tags":["garden","outdoor","seasonal"],"blurb":"Sturdy kit for beds, borders and pots; `+
		`made to last several seasons.","rank_hint":0.5}`, sku, sku)
}

// listBody renders a backend answer holding the given skus under /items,
// with fields around the list that the merged answer must keep.
func listBody(model string, skus ...string) string {
	items := make([]string, len(skus))
	for i, s := range skus {
		items[i] = gardenItem(s)
	}
	return fmt.Sprintf(`{"model":%q,"items":[%s],"page":{"size":%d}}`, model, strings.Join(items, ","), len(skus))
}

func skus(prefix string, n int) []string {
	out := make([]string, n)
	for i := range out {
		out[i] = fmt.Sprintf("%s-%02d", prefix, i+1)
	}
	return out
}

// memSink keeps every impression recorded.
type memSink struct {
	mu  sync.Mutex
	ims []*store.Impression
}

func (m *memSink) Record(im *store.Impression) bool {
	m.mu.Lock()
	defer m.mu.Unlock()
	m.ims = append(m.ims, im)
	return true
}

func (m *memSink) all() []*store.Impression {
	m.mu.Lock()
	defer m.mu.Unlock()
	return append([]*store.Impression(nil), m.ims...)
}

func (m *memSink) last(t *testing.T) *store.Impression {
	t.Helper()
	ims := m.all()
	if len(ims) == 0 {
		t.Fatal("no impression recorded")
	}
	return ims[len(ims)-1]
}

// jsonBackend answers every request with body as JSON.
func jsonBackend(t *testing.T, body string) *httptest.Server {
	t.Helper()
	return backendFunc(t, func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Content-Type", "application/json")
		io.WriteString(w, body)
	})
}

func backendFunc(t *testing.T, h http.HandlerFunc) *httptest.Server {
	t.Helper()
	srv := httptest.NewServer(h)
	t.Cleanup(srv.Close)
	return srv
}

// closedURL returns the URL of a loopback port that nothing listens on.
func closedURL(t *testing.T) string {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	addr := l.Addr().String()
	l.Close()
	return "http://" + addr
}

// testConfig is a complete data-plane config: every field the proxy reads
// is set here rather than left to config's defaults.
func testConfig(incURL, chalURL string) *config.Config {
	ramp := 1.0
	return &config.Config{
		MaxBodyBytes:       1 << 20,
		OnIncumbentFailure: "fail",
		Incumbent:          config.Backend{URL: incURL, Timeout: 2 * time.Second},
		Challenger:         config.Backend{URL: chalURL, Timeout: 2 * time.Second},
		Routes:             []config.Route{{Path: "/v1/recommend", List: "/items", ID: "/sku"}},
		User:               config.User{Header: "Shopper-Id"},
		Experiment:         config.Experiment{Name: "spring-refresh", Policy: "team-draft", Ramp: &ramp},
	}
}

type harness struct {
	srv    *Server
	front  *httptest.Server
	sink   *memSink
	client *http.Client
}

func newHarness(t *testing.T, cfg *config.Config, o Options) *harness {
	t.Helper()
	h := &harness{sink: &memSink{}}
	o.Config = cfg
	if o.Sink == nil {
		o.Sink = h.sink
	}
	s, err := New(o)
	if err != nil {
		t.Fatalf("New: %v", err)
	}
	h.srv = s
	h.front = httptest.NewServer(s.Handler())
	t.Cleanup(h.front.Close)
	// Compression off: the tests must see the Content-Encoding riffle sends.
	h.client = &http.Client{Transport: &http.Transport{DisableCompression: true}}
	t.Cleanup(h.client.CloseIdleConnections)
	return h
}

type reply struct {
	status int
	header http.Header
	body   []byte
}

func (h *harness) do(t *testing.T, method, path, body string, hdr map[string]string) reply {
	t.Helper()
	req, err := http.NewRequest(method, h.front.URL+path, strings.NewReader(body))
	if err != nil {
		t.Fatal(err)
	}
	for k, v := range hdr {
		req.Header.Set(k, v)
	}
	resp, err := h.client.Do(req)
	if err != nil {
		t.Fatalf("%s %s: %v", method, path, err)
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	return reply{resp.StatusCode, resp.Header, b}
}

// servedItems decodes the skus of a served answer's /items list.
func servedItems(t *testing.T, body []byte) []string {
	t.Helper()
	var doc struct {
		Items []struct {
			SKU string `json:"sku"`
		} `json:"items"`
	}
	if err := json.Unmarshal(body, &doc); err != nil {
		t.Fatalf("served body is not JSON: %v\n%s", err, body)
	}
	out := make([]string, len(doc.Items))
	for i, it := range doc.Items {
		out[i] = it.SKU
	}
	return out
}

func teamItems(slots []merge.Slot, team merge.Team) []string {
	var out []string
	for _, s := range slots {
		if s.Team == team {
			out = append(out, s.Item)
		}
	}
	return out
}
