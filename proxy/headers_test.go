package proxy

import (
	"bufio"
	"fmt"
	"io"
	"net"
	"net/http"
	"strings"
	"sync"
	"testing"
	"time"
)

// headerRecorder is a backend that keeps the header of the last request.
type headerRecorder struct {
	mu   sync.Mutex
	got  http.Header
	host string
}

func (h *headerRecorder) serve(body string) http.HandlerFunc {
	return func(w http.ResponseWriter, r *http.Request) {
		h.mu.Lock()
		h.got, h.host = r.Header.Clone(), r.Host
		h.mu.Unlock()
		w.Write([]byte(body))
	}
}

func (h *headerRecorder) header() http.Header {
	h.mu.Lock()
	defer h.mu.Unlock()
	return h.got
}

// rawRequest sends req as written over a new TCP connection and returns
// the status line, so that fields net/http's client would manage itself
// (Connection, Upgrade, TE, Keep-Alive) reach riffle exactly as given.
func rawRequest(t *testing.T, addr, req string) string {
	t.Helper()
	c, err := net.DialTimeout("tcp", addr, 2*time.Second)
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	c.SetDeadline(time.Now().Add(5 * time.Second))
	if _, err := io.WriteString(c, req); err != nil {
		t.Fatal(err)
	}
	resp, err := http.ReadResponse(bufio.NewReader(c), nil)
	if err != nil {
		t.Fatal(err)
	}
	io.Copy(io.Discard, resp.Body)
	resp.Body.Close()
	return resp.Status
}

// TestHopByHopNotForwarded checks RFC 9110 section 7.6.1: Connection, the
// fields it names, and the fields known to be hop-by-hop (Proxy-Connection,
// Keep-Alive, TE, Transfer-Encoding, Upgrade) are not forwarded, on routes
// and on pass-through alike; end-to-end fields are. X-Forwarded-For and
// Forwarded (RFC 7239) get this hop appended.
func TestHopByHopNotForwarded(t *testing.T) {
	var inc, chal headerRecorder
	incSrv := backendFunc(t, inc.serve(listBody("i", "a", "b")))
	chalSrv := backendFunc(t, chal.serve(listBody("c", "c", "d")))
	h := newHarness(t, testConfig(incSrv.URL, chalSrv.URL), Options{})
	addr := strings.TrimPrefix(h.front.URL, "http://")
	for _, path := range []string{"/v1/recommend", "/v1/other"} {
		inc.got, chal.got = nil, nil
		req := fmt.Sprintf("GET %s HTTP/1.1\r\nHost: shop.example\r\n"+
			"Connection: keep-alive, X-Trace-Hop\r\nX-Trace-Hop: secret\r\nKeep-Alive: timeout=5\r\n"+
			"Proxy-Connection: keep-alive\r\nTE: trailers\r\nUpgrade: websocket\r\nProxy-Authorization: Basic eA==\r\n"+
			"Shopper-Id: u-1\r\nAccept: application/json\r\n"+
			"X-Forwarded-For: 203.0.113.9\r\nForwarded: for=203.0.113.9;proto=https\r\n\r\n", path)
		if status := rawRequest(t, addr, req); !strings.HasPrefix(status, "200") {
			t.Fatalf("%s: status %s, want 200", path, status)
		}
		seen := map[string]http.Header{"incumbent": inc.header()}
		if path == "/v1/recommend" {
			seen["challenger"] = chal.header()
		}
		for name, got := range seen {
			if got == nil {
				t.Fatalf("%s: %s got no request", path, name)
			}
			for _, k := range []string{"Connection", "X-Trace-Hop", "Keep-Alive", "Proxy-Connection", "Te", "Upgrade", "Proxy-Authorization"} {
				if v, ok := got[k]; ok {
					t.Errorf("%s: %s received hop-by-hop %s: %q", path, name, k, v)
				}
			}
			for k, want := range map[string]string{
				"Shopper-Id":        "u-1",
				"Accept":            "application/json",
				"X-Forwarded-For":   "203.0.113.9, 127.0.0.1",
				"Forwarded":         "for=203.0.113.9;proto=https, for=127.0.0.1;host=shop.example;proto=http",
				"X-Forwarded-Host":  "shop.example",
				"X-Forwarded-Proto": "http",
			} {
				if v := got.Get(k); v != want {
					t.Errorf("%s: %s got %s %q, want %q", path, name, k, v, want)
				}
			}
		}
	}
}

func TestResponseHopByHopNotForwarded(t *testing.T) {
	inc := backendFunc(t, func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Connection", "X-Backend-Hop")
		w.Header().Set("X-Backend-Hop", "1")
		w.Header().Set("Cache-Control", "max-age=60")
		w.Write([]byte(listBody("i", "a", "b")))
	})
	h := newHarness(t, testConfig(inc.URL, jsonBackend(t, listBody("c", "c")).URL), Options{})
	rep := h.do(t, "GET", "/v1/recommend", "", nil)
	if rep.header.Get("X-Backend-Hop") != "" {
		t.Errorf("client got the backend's hop-by-hop X-Backend-Hop")
	}
	if rep.header.Get("Cache-Control") != "max-age=60" {
		t.Errorf("Cache-Control = %q, want the incumbent's end-to-end max-age=60", rep.header.Get("Cache-Control"))
	}
	if cl := rep.header.Get("Content-Length"); cl != fmt.Sprint(len(rep.body)) {
		t.Errorf("Content-Length = %s, body has %d bytes", cl, len(rep.body))
	}
}

func TestForwardedElement(t *testing.T) {
	// RFC 7239 section 4 and 6: IPv6 nodes are bracketed and quoted; a
	// host with a port is not a token, so it is quoted.
	tests := []struct{ ip, host, want string }{
		{"192.0.2.60", "shop.example", "for=192.0.2.60;host=shop.example;proto=http"},
		{"2001:db8:cafe::17", "shop.example:8080", `for="[2001:db8:cafe::17]";host="shop.example:8080";proto=http`},
		{"", "", "for=unknown;proto=http"},
	}
	for _, tt := range tests {
		if got := forwardedElement(tt.ip, tt.host, "http"); got != tt.want {
			t.Errorf("forwardedElement(%q, %q) = %s, want %s", tt.ip, tt.host, got, tt.want)
		}
	}
}

func TestPassThroughUntouched(t *testing.T) {
	var gotPath, gotQuery, gotBody string
	inc := backendFunc(t, func(w http.ResponseWriter, r *http.Request) {
		b, _ := io.ReadAll(r.Body)
		gotPath, gotQuery, gotBody = r.URL.Path, r.URL.RawQuery, string(b)
		w.Header().Set("Content-Type", "text/plain; charset=utf-8")
		w.Header().Set("X-Shop", "garden")
		w.Header().Set("Content-Encoding", "gzip") // not decoded: pass-through is untouched
		w.WriteHeader(http.StatusTeapot)
		w.Write([]byte("\x1f\x8b opaque bytes"))
	})
	var chalCalls int
	chal := backendFunc(t, func(w http.ResponseWriter, r *http.Request) { chalCalls++ })
	h := newHarness(t, testConfig(inc.URL+"/base", chal.URL), Options{})
	rep := h.do(t, "PUT", "/v1/cart/7?size=large&x=%2F", "basket", nil)
	if rep.status != http.StatusTeapot || string(rep.body) != "\x1f\x8b opaque bytes" {
		t.Errorf("got %d %q, want 418 and the body as sent", rep.status, rep.body)
	}
	for k, want := range map[string]string{"X-Shop": "garden", "Content-Type": "text/plain; charset=utf-8", "Content-Encoding": "gzip"} {
		if got := rep.header.Get(k); got != want {
			t.Errorf("header %s = %q, want %q", k, got, want)
		}
	}
	if rep.header.Get(ImpressionHeader) != "" {
		t.Errorf("pass-through response carries %s", ImpressionHeader)
	}
	if gotPath != "/base/v1/cart/7" || gotQuery != "size=large&x=%2F" || gotBody != "basket" {
		t.Errorf("incumbent got %s ? %s body %q", gotPath, gotQuery, gotBody)
	}
	if chalCalls != 0 {
		t.Errorf("challenger called %d times on a pass-through path", chalCalls)
	}
}
