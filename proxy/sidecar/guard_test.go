package sidecar_test

import (
	"encoding/json"
	"fmt"
	"net/http"
	"strings"
	"testing"
	"time"
)

// TestGuardrailErrorRateTripsAndResets makes the challenger start failing
// under experiment.guardrails.error_rate, and checks that the guardrail
// trips once the window holds min_requests calls, that the requests after
// it get the incumbent alone without calling the challenger, that the
// status, guardrail API and metrics say which guardrail tripped and why,
// and that POST /api/v1/guardrails/reset brings the challenger back.
func TestGuardrailErrorRateTripsAndResets(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	inc := newBackend(t, "incumbent", incumbentShelf, 0)
	chal := newBackend(t, "challenger", challengerShelf, 0)
	c := newConf(dir, inc.URL, chal.URL)
	c.Guardrails = "{error_rate: 0.2, min_requests: 20, window: 10s}"
	r := start(t, dir, c)

	user := func(i int) string { return fmt.Sprintf("shopper-%02d", i) }
	for i := range 10 {
		if a := mustRecommend(t, r.data, user(i), ""); !a.interleaved() {
			t.Fatalf("healthy request %d: items %v, want both shelves", i, a.skus)
		}
	}
	chal.fail.Store(true)
	// 10 failures in 20 calls is 50%, above the 20% bound; the window
	// reaches min_requests on the 20th call, so that call trips it.
	for i := 10; i < 20; i++ {
		if a := mustRecommend(t, r.data, user(i), ""); a.interleaved() {
			t.Fatalf("request %d with the challenger failing: items %v, want the incumbent's alone", i, a.skus)
		}
	}
	if got := chal.hits.Load(); got != 20 {
		t.Fatalf("challenger called %d times in 20 requests, want 20", got)
	}
	for i := 20; i < 30; i++ {
		if a := mustRecommend(t, r.data, user(i), ""); a.interleaved() || a.model != "incumbent" {
			t.Fatalf("request %d after the trip: model %q items %v, want the incumbent's list alone", i, a.model, a.skus)
		}
	}
	if got := chal.hits.Load(); got != 20 {
		t.Errorf("challenger called %d times in all, want 20: the 10 requests after the trip must not call it", got)
	}
	checkTripped(t, r)

	chal.fail.Store(false)
	status, body := do(t, http.MethodPost, r.adm+"/api/v1/guardrails/reset")
	var reset struct {
		Cleared *struct{ Guardrail string } `json:"cleared"`
	}
	if err := json.Unmarshal(body, &reset); err != nil || status != http.StatusOK || reset.Cleared == nil ||
		reset.Cleared.Guardrail != "error-rate" {
		t.Fatalf("POST /api/v1/guardrails/reset: status %d, body %s; want 200 clearing error-rate", status, body)
	}
	if a := mustRecommend(t, r.data, user(30), ""); !a.interleaved() {
		t.Errorf("after the reset: items %v, want both shelves again", a.skus)
	}
	if got := chal.hits.Load(); got != 21 {
		t.Errorf("challenger called %d times after the reset, want 21", got)
	}
	eventually(t, 5*time.Second, func() (bool, string) {
		st := r.experiment(t)
		return !st.Guardrail.Tripped && st.Ramp != nil && *st.Ramp == 1,
			fmt.Sprintf("after the reset /api/v1/experiment ramp %v guardrail %+v, want ramp 1 and not tripped", deref(st.Ramp), st.Guardrail)
	})
	if got := r.scrape(t).value("riffle_guardrail_tripped", labels{"guardrail": "error-rate"}); got != 0 {
		t.Errorf("riffle_guardrail_tripped{guardrail=error-rate} = %v after the reset, want 0", got)
	}
}

// checkTripped checks that the status, the guardrail API and the metrics
// report the error-rate guardrail as tripped with its reason.
func checkTripped(t *testing.T, r *running) {
	t.Helper()
	// The status is cached for a second.
	eventually(t, 5*time.Second, func() (bool, string) {
		st := r.experiment(t)
		g := st.Guardrail
		ok := g.Tripped && g.Guardrail == "error-rate" && strings.Contains(g.Reason, "10 of its last 20 calls") &&
			st.Ramp != nil && *st.Ramp == 0
		return ok, fmt.Sprintf("/api/v1/experiment ramp %v guardrail %+v, want ramp 0 and error-rate tripped after 10 of 20 calls failed",
			deref(st.Ramp), g)
	})
	var gr struct {
		Tripped bool
		Trip    *struct{ Guardrail, Reason string }
	}
	getJSON(t, r.adm+"/api/v1/guardrails", &gr)
	if !gr.Tripped || gr.Trip == nil || gr.Trip.Guardrail != "error-rate" || gr.Trip.Reason == "" {
		t.Errorf("GET /api/v1/guardrails = %+v, want error-rate tripped with a reason", gr)
	}
	r.scrape(t).check(t, []metricCheck{
		{"riffle_guardrail_tripped", labels{"guardrail": "error-rate"}, 1},
		{"riffle_guardrail_tripped", nil, 1},
		{"riffle_guardrail_trips_total", labels{"guardrail": "error-rate"}, 1},
		{"riffle_experiment_ramp_ratio", labels{"experiment": "spring-refresh"}, 0},
		{"riffle_proxy_requests_total", labels{"outcome": "interleaved"}, 10},
		{"riffle_proxy_requests_total", labels{"outcome": "incumbent-only", "reason": "challenger-status"}, 10},
		{"riffle_proxy_requests_total", labels{"outcome": "incumbent-only", "reason": "guardrail"}, 10},
		{"riffle_backend_errors_total", labels{"backend": "challenger", "kind": "status"}, 10},
	})
}
