package proxy

import (
	"reflect"
	"strings"
	"testing"

	"riffle/store"
)

// TestKeepRequests checks experiment.keep_requests: an interleaved
// impression carries its request (method, path, query, body, only the
// named headers) and the source lists' lengths; an incumbent-only one and
// a request over keep_request_bytes carry none; off by default.
func TestKeepRequests(t *testing.T) {
	inc := jsonBackend(t, listBody("incumbent", skus("a", 5)...))
	chal := jsonBackend(t, listBody("challenger", skus("b", 4)...))
	for _, tc := range []struct {
		name  string
		on    bool
		bound int64
		body  string
		want  *store.Request
	}{
		{"off", false, 16384, `{"basket":["trowel"]}`, nil},
		{"on", true, 16384, `{"basket":["trowel"]}`, &store.Request{Route: "/v1/recommend", Method: "POST",
			Path: "/v1/recommend", Query: "n=5", Header: [][2]string{{"Accept-Language", "en-GB"}},
			Body: []byte(`{"basket":["trowel"]}`), Lengths: [2]int32{5, 4}}},
		{"over the bound", true, 30, strings.Repeat("x", 31), nil},
	} {
		t.Run(tc.name, func(t *testing.T) {
			cfg := testConfig(inc.URL, chal.URL)
			cfg.Experiment.Policy = "probabilistic"
			cfg.Experiment.KeepRequests = tc.on
			cfg.Experiment.KeepHeaders = []string{"accept-language"}
			cfg.Experiment.KeepRequestBytes = tc.bound
			h := newHarness(t, cfg, Options{})
			h.do(t, "POST", "/v1/recommend?n=5", tc.body,
				map[string]string{"Shopper-Id": "s-1", "Accept-Language": "en-GB", "Cookie": "secret"})
			im := h.sink.last(t)
			if im.Fallback != "" || im.Policy != "probabilistic" {
				t.Fatalf("impression %+v, want an interleaved one", im)
			}
			if !reflect.DeepEqual(im.Request, tc.want) {
				t.Errorf("kept request %+v, want %+v", im.Request, tc.want)
			}
		})
	}
	cfg := testConfig(inc.URL, closedURL(t))
	cfg.Experiment.KeepRequests = true
	cfg.Experiment.KeepRequestBytes = 16384
	h := newHarness(t, cfg, Options{})
	h.do(t, "GET", "/v1/recommend", "", map[string]string{"Shopper-Id": "s-2"})
	if im := h.sink.last(t); im.Fallback == "" || im.Request != nil {
		t.Errorf("incumbent-only impression (fallback %q) keeps %+v, want none", im.Fallback, im.Request)
	}
}
