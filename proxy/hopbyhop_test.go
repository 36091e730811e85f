package proxy

import (
	"net/http"
	"net/http/httptest"
	"slices"
	"strings"
	"testing"
)

// TestHopByHopFieldsDropped checks forwardable, in both directions, field
// by field against the standards rather than against its own list:
//
//   - RFC 9110 section 7.6.1: Connection, and the fields it names as
//     connection options, are hop-by-hop; so are Proxy-Connection,
//     Keep-Alive, TE, Transfer-Encoding and Upgrade.
//   - RFC 2616 section 13.5.1 adds Proxy-Authenticate,
//     Proxy-Authorization and the trailer announcement. That list spells
//     it "Trailers" (recalled from memory as a known erratum); the field
//     is named Trailer (RFC 9110 section 6.6.2), so Trailer must go.
//   - RFC 9110 section 5.1: field names are case-insensitive, and section
//     5.6.1: a list's elements may have optional whitespace around the
//     commas, so "x-trace-hop", " X-TRACE-HOP " and "X-Trace-Hop" in
//     Connection all name the field net/http stores as X-Trace-Hop.
//
// Everything else is end-to-end and forwarded unchanged.
func TestHopByHopFieldsDropped(t *testing.T) {
	hop := []string{"Connection", "Proxy-Connection", "Keep-Alive", "Te", "Transfer-Encoding", "Upgrade",
		"Proxy-Authenticate", "Proxy-Authorization", "Trailer"}
	endToEnd := map[string]string{"Accept": "application/json", "Cache-Control": "no-store", "Shopper-Id": "u-7", "X-Shop": "garden"}
	tests := []struct {
		name       string
		connection []string // the Connection field lines
		named      string   // the field they name, as net/http stores it
	}{
		{"canonical option", []string{"X-Trace-Hop"}, "X-Trace-Hop"},
		{"lower-case option", []string{"x-trace-hop"}, "X-Trace-Hop"},
		{"upper case, whitespace, second element", []string{"keep-alive,  X-TRACE-HOP "}, "X-Trace-Hop"},
		{"second Connection line", []string{"close", "x-trace-hop"}, "X-Trace-Hop"},
		{"option naming an end-to-end-looking field", []string{"keep-alive, cache-control"}, "Cache-Control"},
	}
	for _, tc := range tests {
		src := http.Header{}
		for _, k := range hop {
			src[k] = []string{"v"}
		}
		src["Connection"] = tc.connection
		src[tc.named] = []string{"hop"}
		for k, v := range endToEnd {
			if k != tc.named {
				src[k] = []string{v}
			}
		}
		dirs := map[string]http.Header{"request": {}, "response": {}}
		forwardable(dirs["request"], src, nil)
		responseHeader(dirs["response"], src)
		for dir, got := range dirs {
			for _, k := range append(slices.Clone(hop), tc.named) {
				if v, ok := got[k]; ok {
					t.Errorf("%s, %s: hop-by-hop %s forwarded as %q", tc.name, dir, k, v)
				}
			}
			for k, want := range endToEnd {
				if k == tc.named {
					continue
				}
				if v := strings.Join(got[k], ","); v != want {
					t.Errorf("%s, %s: end-to-end %s = %q, want %q", tc.name, dir, k, v, want)
				}
			}
		}
	}
}

// TestOutboundHeaderDropsLowerCaseOption: the full request path, from a
// client's Connection field naming a field in lower case (RFC 9110 section
// 5.1: case-insensitive) to what both backends receive.
func TestOutboundHeaderDropsLowerCaseOption(t *testing.T) {
	in := httptest.NewRequest("GET", "/v1/recommend", nil)
	in.Header["Connection"] = []string{"x-debug-hop"}
	in.Header["X-Debug-Hop"] = []string{"secret"}
	in.Header["Trailer"] = []string{"X-Checksum"}
	in.Header["Shopper-Id"] = []string{"u-7"}
	got := outboundHeader(in, "riffle-test")
	for _, k := range []string{"Connection", "X-Debug-Hop", "Trailer"} {
		if v, ok := got[k]; ok {
			t.Errorf("outbound header carries hop-by-hop %s: %q", k, v)
		}
	}
	if got.Get("Shopper-Id") != "u-7" || got.Get("Accept-Encoding") != "gzip" {
		t.Errorf("outbound header %v: want Shopper-Id u-7 and Accept-Encoding gzip", got)
	}
}
