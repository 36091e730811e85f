package main

import (
	"io"
	"net/http"
	"net/http/httptest"
	"sync"
	"testing"
	"time"
)

func newFanout(incumbent, challenger string) *fanout {
	return &fanout{incumbent: incumbent, challenger: challenger, timeout: 2 * time.Second,
		client: &http.Client{Transport: newTransport()}}
}

// get sends one request through h and returns the recorded response.
func get(t *testing.T, h http.Handler, header http.Header) *http.Response {
	t.Helper()
	srv := httptest.NewServer(h)
	defer srv.Close()
	req, err := http.NewRequest(http.MethodGet, srv.URL+routePath+"?limit=20", nil)
	if err != nil {
		t.Fatal(err)
	}
	for k, vs := range header {
		req.Header[k] = vs
	}
	resp, err := srv.Client().Do(req)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { resp.Body.Close() })
	return resp
}

func TestFanoutReturnsIncumbentVerbatim(t *testing.T) {
	inc, chal, err := bodies(3)
	if err != nil {
		t.Fatal(err)
	}
	bi := httptest.NewServer(backend(inc, 0))
	defer bi.Close()
	bc := httptest.NewServer(backend(chal, 0))
	defer bc.Close()
	resp := get(t, newFanout(bi.URL, bc.URL), http.Header{shopperHeader: {"shopper-0042"}})
	body, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatal(err)
	}
	want := inc[variant("shopper-0042", variants)]
	if resp.StatusCode != http.StatusOK || string(body) != string(want) {
		t.Errorf("got %s %.80q..., want 200 and the incumbent's body %.80q...", resp.Status, body, want)
	}
	if ct := resp.Header.Get("Content-Type"); ct != "application/json" {
		t.Errorf("Content-Type: got %q, want the incumbent's application/json", ct)
	}
}

// TestFanoutCallsBothConcurrently holds each backend until the other one
// has been called too: a proxy that called them one after the other would
// time out here.
func TestFanoutCallsBothConcurrently(t *testing.T) {
	var arrived sync.WaitGroup
	arrived.Add(2)
	both := make(chan struct{})
	go func() { arrived.Wait(); close(both) }()
	h := func(body string) http.HandlerFunc {
		return func(w http.ResponseWriter, r *http.Request) {
			arrived.Done()
			select {
			case <-both:
				io.WriteString(w, body)
			case <-time.After(5 * time.Second):
				http.Error(w, "the other backend was never called", http.StatusGatewayTimeout)
			}
		}
	}
	bi := httptest.NewServer(h(`{"model":"incumbent"}`))
	defer bi.Close()
	bc := httptest.NewServer(h(`{"model":"challenger"}`))
	defer bc.Close()
	resp := get(t, newFanout(bi.URL, bc.URL), nil)
	body, _ := io.ReadAll(resp.Body)
	if resp.StatusCode != http.StatusOK || string(body) != `{"model":"incumbent"}` {
		t.Errorf("got %s %q, want 200 and the incumbent's body", resp.Status, body)
	}
}

// TestFanoutHopByHop checks the hop-by-hop fields of RFC 9110 section
// 7.6.1 (Connection, the fields it lists, Keep-Alive, TE, Upgrade, ...)
// stop at the proxy while end-to-end fields reach both backends.
func TestFanoutHopByHop(t *testing.T) {
	got := make(chan http.Header, 2)
	h := http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		got <- r.Header.Clone()
		io.WriteString(w, `{}`)
	})
	bi := httptest.NewServer(h)
	defer bi.Close()
	bc := httptest.NewServer(h)
	defer bc.Close()
	get(t, newFanout(bi.URL, bc.URL), http.Header{
		shopperHeader: {"shopper-7"},
		"Connection":  {"X-Hop-Only"},
		"X-Hop-Only":  {"1"},
		"Keep-Alive":  {"timeout=5"},
		"Te":          {"trailers"},
		"Upgrade":     {"websocket"},
	})
	for range 2 {
		hdr := <-got
		if hdr.Get(shopperHeader) != "shopper-7" {
			t.Errorf("backend saw %s %q, want the end-to-end value shopper-7", shopperHeader, hdr.Get(shopperHeader))
		}
		for _, name := range []string{"X-Hop-Only", "Keep-Alive", "Te", "Upgrade"} {
			if v := hdr.Get(name); v != "" {
				t.Errorf("backend saw hop-by-hop %s: %q, want it removed (RFC 9110 section 7.6.1)", name, v)
			}
		}
	}
}

func TestFanoutFailures(t *testing.T) {
	ok := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		io.WriteString(w, `{"model":"up"}`)
	}))
	defer ok.Close()
	down := httptest.NewServer(http.NotFoundHandler())
	down.Close() // a closed port: connections are refused
	tests := []struct {
		name                  string
		incumbent, challenger string
		wantStatus            int
		wantBody              string
	}{
		{"challenger down", ok.URL, down.URL, http.StatusOK, `{"model":"up"}`},
		{"incumbent down", down.URL, ok.URL, http.StatusBadGateway, "{\"error\":\"incumbent failed\"}\n"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			resp := get(t, newFanout(tt.incumbent, tt.challenger), nil)
			body, _ := io.ReadAll(resp.Body)
			if resp.StatusCode != tt.wantStatus || string(body) != tt.wantBody {
				t.Errorf("got %d %q, want %d %q", resp.StatusCode, body, tt.wantStatus, tt.wantBody)
			}
		})
	}
}

func TestTransportSettings(t *testing.T) {
	tr := newTransport()
	// net/http's DefaultMaxIdleConnsPerHost is 2 (net/http documentation);
	// at 2 a busy proxy dials for most requests, so the bench needs more.
	if tr.MaxIdleConnsPerHost < 64 || tr.MaxIdleConns < tr.MaxIdleConnsPerHost {
		t.Errorf("got MaxIdleConnsPerHost %d, MaxIdleConns %d; want at least 64 and at least as many in total",
			tr.MaxIdleConnsPerHost, tr.MaxIdleConns)
	}
}
