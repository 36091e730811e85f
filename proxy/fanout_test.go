package proxy

import (
	"bytes"
	"encoding/json"
	"errors"
	"io"
	"net/http"
	"slices"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"riffle/merge"
	"riffle/proxy/jsonptr"
	"riffle/store"
)

func TestInterleavedList(t *testing.T) {
	a := skus("rake", 10)
	b := append([]string{"hose-01", a[3], "hose-02", a[0]}, skus("pot", 6)...)
	inc, chal := listBody("incumbent", a...), listBody("challenger", b...)
	tests := []struct {
		name  string
		slots int
		want  int
	}{
		{"incumbent length", 0, 10},
		{"fixed slots", 6, 6},
		{"more slots than items", 40, 18}, // |A ∪ B| = 10 + 10 - 2 shared
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			cfg := testConfig(jsonBackend(t, inc).URL, jsonBackend(t, chal).URL)
			cfg.Routes[0].Slots = tt.slots
			h := newHarness(t, cfg, Options{})
			rep := h.do(t, "GET", "/v1/recommend?n=10", "", map[string]string{"Shopper-Id": "u1"})
			if rep.status != http.StatusOK {
				t.Fatalf("status = %d, want 200; body %s", rep.status, rep.body)
			}
			got := servedItems(t, rep.body)
			if len(got) != tt.want {
				t.Errorf("merged length = %d, want %d", len(got), tt.want)
			}
			if u := slices.Compact(slices.Sorted(slices.Values(got))); len(u) != len(got) {
				t.Errorf("merged list %v has repeated items", got)
			}
			im := h.sink.last(t)
			if im.Fallback != "" || im.Policy != "team-draft" {
				t.Fatalf("impression fallback %q policy %q, want interleaved team-draft", im.Fallback, im.Policy)
			}
			checkSlotsMatch(t, im.Slots, got)
			// Each team's items keep their source list's order (team-draft
			// picks each team's highest-ranked unused item, Radlinski,
			// Kurup & Joachims 2008).
			checkSubsequence(t, teamItems(im.Slots, merge.Incumbent), a)
			checkSubsequence(t, teamItems(im.Slots, merge.Challenger), b)
			checkElementsWhole(t, rep.body, im.Slots)
			if ct := rep.header.Get("Content-Type"); ct != "application/json" {
				t.Errorf("Content-Type = %q, want the incumbent's application/json", ct)
			}
			if im.Seed != im.ID.Seed() {
				t.Errorf("impression seed %d, want id.Seed() %d", im.Seed, im.ID.Seed())
			}
		})
	}
}

func checkSlotsMatch(t *testing.T, slots []merge.Slot, served []string) {
	t.Helper()
	var items []string
	for _, s := range slots {
		items = append(items, s.Item)
	}
	if !slices.Equal(items, served) {
		t.Errorf("recorded slots %v, served %v", items, served)
	}
}

// checkSubsequence checks that got appears in want's order.
func checkSubsequence(t *testing.T, got, want []string) {
	t.Helper()
	j := 0
	for _, g := range got {
		for j < len(want) && want[j] != g {
			j++
		}
		if j == len(want) {
			t.Errorf("team items %v are not in source order %v", got, want)
			return
		}
		j++
	}
}

// checkElementsWhole checks that every served element is byte for byte
// the element its backend sent, and that the fields around the list are
// the incumbent's.
func checkElementsWhole(t *testing.T, body []byte, slots []merge.Slot) {
	t.Helper()
	p, _ := jsonptr.Parse("/items")
	sp, elems, err := p.FindArray(nil, body, jsonptr.Pointer{})
	if err != nil {
		t.Fatal(err)
	}
	for i, e := range elems {
		if got, want := string(body[e.Start:e.End]), gardenItem(slots[i].Item); got != want {
			t.Errorf("element %d = %s, want the backend's bytes %s", i, got, want)
		}
	}
	if got := string(body[:sp.Start]); got != `{"model":"incumbent","items":` {
		t.Errorf("document before the list = %s, want the incumbent's", got)
	}
	if got := string(body[sp.End:]); got != `,"page":{"size":10}}` {
		t.Errorf("document after the list = %s, want the incumbent's", got)
	}
}

func TestSlowChallengerWithinDeadline(t *testing.T) {
	inc := listBody("incumbent", skus("rake", 5)...)
	slow := backendFunc(t, func(w http.ResponseWriter, r *http.Request) {
		select {
		case <-time.After(3 * time.Second):
		case <-r.Context().Done():
		}
	})
	cfg := testConfig(jsonBackend(t, inc).URL, slow.URL)
	cfg.Challenger.Timeout = 100 * time.Millisecond
	obs := &observer{}
	h := newHarness(t, cfg, Options{Observer: obs})
	h.do(t, "GET", "/v1/recommend", "", nil) // warm the incumbent's connection
	start := time.Now()
	rep := h.do(t, "GET", "/v1/recommend", "", nil)
	took := time.Since(start)
	if limit := cfg.Challenger.Timeout + 50*time.Millisecond; took > limit {
		t.Errorf("answer took %v, want at most the challenger's deadline + 50ms = %v", took, limit)
	}
	if rep.status != http.StatusOK || string(rep.body) != inc {
		t.Errorf("status %d body %s, want 200 with the incumbent's body", rep.status, rep.body)
	}
	if errs := obs.seen(); len(errs) != 2 || !errors.Is(errs[1], ErrTimeout) {
		t.Errorf("observer told %v, want an ErrTimeout for the second call", errs)
	}
	if im := h.sink.last(t); im.Fallback != "challenger-timeout" || len(im.Slots) != 5 {
		t.Errorf("impression fallback %q with %d slots, want challenger-timeout with 5", im.Fallback, len(im.Slots))
	}
}

func TestChallengerFailureServesIncumbent(t *testing.T) {
	inc := listBody("incumbent", skus("rake", 4)...)
	tests := []struct {
		name, want string
		wantErr    error // what the Observer is told; nil for a usable answer
		url        func(t *testing.T) string
	}{
		{"status 500", "challenger-status", ErrStatus, func(t *testing.T) string {
			return backendFunc(t, func(w http.ResponseWriter, r *http.Request) { http.Error(w, "boom", 500) }).URL
		}},
		{"garbage body", "challenger-body", ErrBody, func(t *testing.T) string { return jsonBackend(t, `{"items":[{"sku":"a"},`).URL }},
		{"not JSON", "challenger-body", ErrBody, func(t *testing.T) string { return jsonBackend(t, "<html>oops</html>").URL }},
		{"missing list", "challenger-body", ErrBody, func(t *testing.T) string { return jsonBackend(t, `{"results":[]}`).URL }},
		{"list not an array", "challenger-body", ErrBody, func(t *testing.T) string { return jsonBackend(t, `{"items":{"sku":"a"}}`).URL }},
		{"bad gzip", "challenger-body", ErrBody, func(t *testing.T) string {
			return backendFunc(t, func(w http.ResponseWriter, r *http.Request) {
				w.Header().Set("Content-Encoding", "gzip")
				w.Write([]byte("not gzip at all"))
			}).URL
		}},
		{"empty list", "challenger-empty", nil, func(t *testing.T) string { return jsonBackend(t, `{"items":[]}`).URL }},
		{"no identities", "challenger-empty", nil, func(t *testing.T) string { return jsonBackend(t, `{"items":[{"id":1},{"sku":true}]}`).URL }},
		{"closed port", "challenger-connect", ErrConnect, closedURL},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			obs := &observer{}
			h := newHarness(t, testConfig(jsonBackend(t, inc).URL, tt.url(t)), Options{Observer: obs})
			rep := h.do(t, "GET", "/v1/recommend", "", nil)
			if rep.status != http.StatusOK || string(rep.body) != inc {
				t.Errorf("status %d body %s, want 200 with the incumbent's body", rep.status, rep.body)
			}
			if im := h.sink.last(t); im.Fallback != tt.want || im.Interleaved() {
				t.Errorf("impression fallback %q, want %q", im.Fallback, tt.want)
			}
			if errs := obs.seen(); len(errs) != 1 || !errors.Is(errs[0], tt.wantErr) || (tt.wantErr == nil) != (errs[0] == nil) {
				t.Errorf("observer told %v, want one error matching %v", errs, tt.wantErr)
			}
		})
	}
}

func TestIncumbentFailure(t *testing.T) {
	chal := listBody("challenger", skus("hose", 3)...)
	failing := func(t *testing.T) string {
		return backendFunc(t, func(w http.ResponseWriter, r *http.Request) { http.Error(w, "down", 503) }).URL
	}
	slow := func(t *testing.T) string {
		return backendFunc(t, func(w http.ResponseWriter, r *http.Request) {
			select {
			case <-time.After(3 * time.Second):
			case <-r.Context().Done():
			}
		}).URL
	}
	tests := []struct {
		name, mode, reason string
		url                func(t *testing.T) string
		wantStatus         int
	}{
		{"5xx fails", "fail", "incumbent-status", failing, http.StatusBadGateway},
		{"closed port fails", "fail", "incumbent-connect", closedURL, http.StatusBadGateway},
		{"timeout fails", "", "incumbent-timeout", slow, http.StatusBadGateway},
		{"5xx serves challenger", "serve-challenger", "incumbent-status", failing, http.StatusOK},
		{"closed port serves challenger", "serve-challenger", "incumbent-connect", closedURL, http.StatusOK},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			cfg := testConfig(tt.url(t), jsonBackend(t, chal).URL)
			cfg.OnIncumbentFailure = tt.mode
			cfg.Incumbent.Timeout = 100 * time.Millisecond
			h := newHarness(t, cfg, Options{})
			rep := h.do(t, "GET", "/v1/recommend", "", nil)
			if rep.status != tt.wantStatus {
				t.Fatalf("status = %d, want %d; body %s", rep.status, tt.wantStatus, rep.body)
			}
			if tt.wantStatus == http.StatusOK {
				if string(rep.body) != chal {
					t.Errorf("body %s, want the challenger's", rep.body)
				}
				im := h.sink.last(t)
				if im.Fallback != tt.reason || len(im.Slots) != 3 || im.Slots[0].Team != merge.Challenger || im.Slots[0].RankB != 1 {
					t.Errorf("impression %+v, want challenger-only with fallback %q", im, tt.reason)
				}
				return
			}
			var e errorBody
			if err := json.Unmarshal(rep.body, &e); err != nil {
				t.Fatalf("502 body is not JSON: %v: %s", err, rep.body)
			}
			if e.Backend != "incumbent" || e.Reason != tt.reason || e.Error == "" {
				t.Errorf("502 body %+v, want backend incumbent, reason %q and a message", e, tt.reason)
			}
			if n := len(h.sink.all()); n != 0 {
				t.Errorf("%d impressions recorded for a failed request, want 0", n)
			}
		})
	}
}

func TestIncumbentClientErrorPassedOn(t *testing.T) {
	inc := backendFunc(t, func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Content-Type", "application/problem+json")
		w.WriteHeader(http.StatusBadRequest)
		w.Write([]byte(`{"title":"unknown shop"}`))
	})
	h := newHarness(t, testConfig(inc.URL, jsonBackend(t, listBody("c", "a")).URL), Options{})
	rep := h.do(t, "GET", "/v1/recommend", "", nil)
	if rep.status != http.StatusBadRequest || string(rep.body) != `{"title":"unknown shop"}` ||
		rep.header.Get("Content-Type") != "application/problem+json" {
		t.Errorf("got %d %q %s, want the incumbent's 400 as it came", rep.status, rep.header.Get("Content-Type"), rep.body)
	}
}

func TestRequestBodyReplayed(t *testing.T) {
	var incGot, chalGot atomic.Pointer[[]byte]
	mk := func(dst *atomic.Pointer[[]byte], body string) string {
		return backendFunc(t, func(w http.ResponseWriter, r *http.Request) {
			b := new(bytes.Buffer)
			b.ReadFrom(r.Body)
			v := b.Bytes()
			dst.Store(&v)
			w.Write([]byte(body))
		}).URL
	}
	cfg := testConfig(mk(&incGot, listBody("i", "a", "b")), mk(&chalGot, listBody("c", "b", "c")))
	h := newHarness(t, cfg, Options{})
	sent := `{"shopper":{"id":"u-7"},"basket":["trowel","twine"],"note":"caf\u00e9 \ud83c\udf31","raw":"` +
		strings.Repeat("x", 70000) + `"}`
	rep := h.do(t, "POST", "/v1/recommend", sent, map[string]string{"Content-Type": "application/json"})
	if rep.status != 200 {
		t.Fatalf("status %d: %s", rep.status, rep.body)
	}
	for name, got := range map[string]*atomic.Pointer[[]byte]{"incumbent": &incGot, "challenger": &chalGot} {
		if b := got.Load(); b == nil || !bytes.Equal(*b, []byte(sent)) {
			t.Errorf("%s received a body that is not byte-identical to the one sent", name)
		}
	}
}

func TestImpressionHeaderOnEveryRouteResponse(t *testing.T) {
	ok := jsonBackend(t, listBody("x", "a", "b")).URL
	down := closedURL(t)
	zero := 0.0
	tests := []struct {
		name     string
		inc      string
		ramp     *float64
		body     string
		wantCode int
	}{
		{"interleaved", ok, nil, "", 200},
		{"outside ramp", ok, &zero, "", 200},
		{"incumbent down", down, nil, "", 502},
		{"too large", ok, nil, strings.Repeat("y", 2048), 413},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			cfg := testConfig(tt.inc, ok)
			cfg.MaxBodyBytes = 1024
			if tt.ramp != nil {
				cfg.Experiment.Ramp = tt.ramp
			}
			h := newHarness(t, cfg, Options{})
			rep := h.do(t, "POST", "/v1/recommend", tt.body, nil)
			if rep.status != tt.wantCode {
				t.Fatalf("status = %d, want %d", rep.status, tt.wantCode)
			}
			id, err := store.ParseID(rep.header.Get(ImpressionHeader))
			if err != nil {
				t.Fatalf("%s header: %v", ImpressionHeader, err)
			}
			if ims := h.sink.all(); len(ims) > 0 && ims[len(ims)-1].ID != id {
				t.Errorf("header id %s is not the recorded impression's %s", id, ims[len(ims)-1].ID)
			}
		})
	}
}

func TestRequestTooLarge(t *testing.T) {
	var calls atomic.Int32
	b := backendFunc(t, func(w http.ResponseWriter, r *http.Request) { calls.Add(1); w.Write([]byte(listBody("x", "a"))) })
	cfg := testConfig(b.URL, b.URL)
	cfg.MaxBodyBytes = 100
	h := newHarness(t, cfg, Options{})
	for _, n := range []int{101, 5000} {
		rep := h.do(t, "POST", "/v1/recommend", strings.Repeat("z", n), nil)
		if rep.status != http.StatusRequestEntityTooLarge || !strings.Contains(string(rep.body), "request-too-large") {
			t.Errorf("%d-byte body: status %d body %s, want 413 request-too-large", n, rep.status, rep.body)
		}
	}
	// A chunked body has no Content-Length: the limit must hold while reading.
	req, _ := http.NewRequest("POST", h.front.URL+"/v1/recommend", io.MultiReader(strings.NewReader(strings.Repeat("z", 300))))
	if resp, err := h.front.Client().Do(req); err != nil || resp.StatusCode != http.StatusRequestEntityTooLarge {
		t.Errorf("chunked 300-byte body: %v %v, want 413", resp.StatusCode, err)
	} else {
		resp.Body.Close()
	}
	if rep := h.do(t, "POST", "/v1/recommend", strings.Repeat("z", 100), nil); rep.status != 200 {
		t.Errorf("100-byte body (the limit): status %d, want 200", rep.status)
	}
	if got := calls.Load(); got != 2 {
		t.Errorf("backends called %d times, want 2 (only for the body within the limit)", got)
	}
}
