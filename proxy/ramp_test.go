package proxy

import (
	"fmt"
	"math"
	"net/http"
	"sync/atomic"
	"testing"
	"time"

	"gonum.org/v1/gonum/stat/distuv"

	"riffle/proxy/config"
	"riffle/proxy/guard"
	"riffle/store"
)

// countingBackend answers with a list and counts its calls.
func countingBackend(t *testing.T, body string, calls *atomic.Int64) string {
	return backendFunc(t, func(w http.ResponseWriter, r *http.Request) {
		calls.Add(1)
		w.Write([]byte(body))
	}).URL
}

func TestRampZeroNeverCallsChallenger(t *testing.T) {
	var chalCalls atomic.Int64
	zero := 0.0
	cfg := testConfig(jsonBackend(t, listBody("i", "a", "b")).URL, countingBackend(t, listBody("c", "c"), &chalCalls))
	cfg.Experiment.Ramp = &zero
	h := newHarness(t, cfg, Options{})
	for i := range 50 {
		hdr := map[string]string{"Shopper-Id": fmt.Sprintf("u%d", i)}
		if i%2 == 0 {
			hdr = nil // bucketed by impression id
		}
		if rep := h.do(t, "GET", "/v1/recommend", "", hdr); rep.status != 200 {
			t.Fatalf("status %d", rep.status)
		}
	}
	if n := chalCalls.Load(); n != 0 {
		t.Errorf("challenger called %d times at ramp 0, want 0", n)
	}
	for _, im := range h.sink.all() {
		if im.Fallback != "ramp" || len(im.Slots) != 2 || im.Slots[1].RankA != 2 {
			t.Fatalf("impression %+v, want incumbent-only for ramp with both slots", im)
		}
	}
}

func TestRampHalfSplitsUsersSticky(t *testing.T) {
	var chalCalls atomic.Int64
	half := 0.5
	cfg := testConfig(jsonBackend(t, listBody("i", "a", "b")).URL, countingBackend(t, listBody("c", "c"), &chalCalls))
	cfg.Experiment.Ramp = &half
	h := newHarness(t, cfg, Options{})
	const users = 400
	in := map[uint64]bool{}
	for round := range 2 {
		for u := range users {
			key := fmt.Sprintf("shopper-%d", u)
			h.do(t, "GET", "/v1/recommend", "", map[string]string{"Shopper-Id": key})
			im := h.sink.last(t)
			if im.User != store.HashUser(key) {
				t.Fatalf("impression user %d, want HashUser(%q)", im.User, key)
			}
			if round == 0 {
				in[im.User] = im.Interleaved()
			} else if in[im.User] != im.Interleaved() {
				t.Fatalf("user %q changed sides between requests", key)
			}
		}
	}
	n := 0
	for _, v := range in {
		if v {
			n++
		}
	}
	// Binomial(400, 0.5) has standard deviation 10; 4 of them either side
	// leaves a false alarm probability below 1e-4 (normal approximation).
	if n < 160 || n > 240 {
		t.Errorf("%d of %d users interleaved at ramp 0.5, want 200 ± 40", n, users)
	}
	if got := chalCalls.Load(); got != int64(2*n) {
		t.Errorf("challenger called %d times, want %d (only for users inside the ramp)", got, 2*n)
	}
}

// TestBucketUniform checks that buckets are uniform on [0,1) with
// Pearson's chi-square goodness-of-fit test over 20 equal bins; the
// critical value comes from gonum's chi-square distribution.
func TestBucketUniform(t *testing.T) {
	const bins, keys = 20, 20000
	counts := make([]float64, bins)
	idCounts := make([]float64, bins)
	for i := range keys {
		b := bucket("spring-refresh", fmt.Sprintf("user-%d", i))
		if b < 0 || b >= 1 {
			t.Fatalf("bucket %v outside [0,1)", b)
		}
		counts[int(b*bins)]++
		idCounts[int(idBucket(store.NewID(time.Unix(int64(i), 0)))*bins)]++
	}
	crit := distuv.ChiSquared{K: bins - 1}.Quantile(0.999)
	for name, c := range map[string][]float64{"user key": counts, "impression id": idCounts} {
		chi := 0.0
		for _, o := range c {
			e := float64(keys) / bins
			chi += (o - e) * (o - e) / e
		}
		if chi > crit || math.IsNaN(chi) {
			t.Errorf("%s buckets: chi-square %.1f over %d bins exceeds the 0.999 quantile %.1f", name, chi, bins, crit)
		}
	}
	if bucket("a", "bc") == bucket("ab", "c") {
		t.Errorf("experiment and key are not separated in the hash")
	}
}

// fakeGate is a Gate whose ramp and trip state the test sets.
type fakeGate struct {
	ramp atomic.Value // float64
}

func (g *fakeGate) Ramp(time.Time) float64 { return g.ramp.Load().(float64) }

func TestGateRamp(t *testing.T) {
	var chalCalls atomic.Int64
	cfg := testConfig(jsonBackend(t, listBody("i", "a")).URL, countingBackend(t, listBody("c", "c"), &chalCalls))
	g := &fakeGate{}
	g.ramp.Store(0.0)
	h := newHarness(t, cfg, Options{Gate: g})
	h.do(t, "GET", "/v1/recommend", "", nil)
	if im := h.sink.last(t); im.Fallback != "ramp" {
		t.Errorf("fallback %q at gate ramp 0, want ramp", im.Fallback)
	}
	g.ramp.Store(1.0)
	h.do(t, "GET", "/v1/recommend", "", nil)
	if im := h.sink.last(t); !im.Interleaved() {
		t.Errorf("fallback %q at gate ramp 1, want interleaved", im.Fallback)
	}
	if chalCalls.Load() != 1 {
		t.Errorf("challenger calls = %d, want 1", chalCalls.Load())
	}
}

func TestUserKeySources(t *testing.T) {
	inc, chal := jsonBackend(t, listBody("i", "a")).URL, jsonBackend(t, listBody("c", "b")).URL
	tests := []struct {
		name       string
		user       config.User
		path, body string
		hdr        map[string]string
		want       string
	}{
		{"header", config.User{Header: "Shopper-Id"}, "/v1/recommend", "", map[string]string{"Shopper-Id": "g-42"}, "g-42"},
		{"query", config.User{Query: "user"}, "/v1/recommend?x=1&user=g%2B42", "", nil, "g+42"},
		{"body string", config.User{Body: "/shopper/id"}, "/v1/recommend", `{"shopper":{"id":"g-\u0034"}}`, nil, "g-4"},
		{"body number", config.User{Body: "/shopper/id"}, "/v1/recommend", `{"shopper":{"id":1.5e3}}`, nil, "1.5e3"},
		{"body missing", config.User{Body: "/shopper/id"}, "/v1/recommend", `{"shopper":{}}`, nil, ""},
		{"header missing", config.User{Header: "Shopper-Id"}, "/v1/recommend", "", nil, ""},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			cfg := testConfig(inc, chal)
			cfg.User = tt.user
			h := newHarness(t, cfg, Options{})
			h.do(t, "POST", tt.path, tt.body, tt.hdr)
			if got, want := h.sink.last(t).User, store.HashUser(tt.want); got != want {
				t.Errorf("user hash %d, want HashUser(%q) = %d", got, tt.want, want)
			}
		})
	}
}

func TestQueryValue(t *testing.T) {
	tests := []struct{ raw, want string }{
		{"user=a", "a"}, {"x=1&user=b&user=c", "b"}, {"us%65r=d", "d"}, {"user=%zz", ""}, {"users=e", ""}, {"", ""},
	}
	for _, tt := range tests {
		if got := queryValue(tt.raw, "user"); got != tt.want {
			t.Errorf("queryValue(%q) = %q, want %q", tt.raw, got, tt.want)
		}
	}
}

// TestGuardrailHaltsChallenger runs the real guard as Gate and Observer: a
// challenger that fails trips the error-rate guardrail, after which
// requests get the incumbent alone, recorded as "guardrail", and the
// challenger is no longer called.
func TestGuardrailHaltsChallenger(t *testing.T) {
	var chalCalls atomic.Int64
	chal := backendFunc(t, func(w http.ResponseWriter, r *http.Request) {
		chalCalls.Add(1)
		http.Error(w, "model crashed", http.StatusInternalServerError)
	})
	g := guard.New(guard.Options{ErrorRate: 0.5, MinRequests: 5, Window: time.Minute})
	h := newHarness(t, testConfig(jsonBackend(t, listBody("i", "a", "b")).URL, chal.URL), Options{Gate: g, Observer: g})
	for range 5 {
		h.do(t, "GET", "/v1/recommend", "", nil)
	}
	if tripped, trip := g.Tripped(); !tripped || trip.Guardrail != guard.ErrorRateGuardrail {
		t.Fatalf("guard tripped=%v %+v after 5 failed challenger calls, want the error-rate guardrail", tripped, trip)
	}
	before := chalCalls.Load()
	for range 10 {
		if rep := h.do(t, "GET", "/v1/recommend", "", nil); rep.status != 200 {
			t.Fatalf("status %d", rep.status)
		}
		if im := h.sink.last(t); im.Fallback != "guardrail" {
			t.Fatalf("fallback %q after the trip, want guardrail", im.Fallback)
		}
	}
	if n := chalCalls.Load() - before; n != 0 {
		t.Errorf("challenger called %d times after the trip, want 0", n)
	}
}
