package admin

import (
	"net/http"
	"strings"
	"testing"

	"riffle/proxy/status"
)

// TestStatusWithoutSlash checks that /status, typed without the slash,
// leads to the status page: it used to redirect to /, a 404. A redirect
// keeps the query (RFC 9110 section 15.4: the target is a URI reference).
func TestStatusWithoutSlash(t *testing.T) {
	f := newFixture(t, func(o *Options) {
		o.Status = http.StripPrefix("/status", status.Handler(status.Options{History: status.NewHistory(8)}))
	})
	client := *f.srv.Client()
	client.CheckRedirect = func(*http.Request, []*http.Request) error { return http.ErrUseLastResponse }
	resp, err := client.Get(f.srv.URL + "/status?window=1h")
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if loc := resp.Header.Get("Location"); resp.StatusCode != http.StatusMovedPermanently || loc != "/status/?window=1h" {
		t.Fatalf("GET /status: %d to %q; want 301 to /status/?window=1h", resp.StatusCode, loc)
	}
	resp, body := f.do(t, http.MethodGet, "/status", "")
	if resp.StatusCode != http.StatusOK || !strings.Contains(resp.Header.Get("Content-Type"), "text/html") {
		t.Fatalf("GET /status followed: %d %s %.80s; want the status page", resp.StatusCode, resp.Header.Get("Content-Type"), body)
	}
}
