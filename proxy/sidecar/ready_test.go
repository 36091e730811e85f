package sidecar_test

import (
	"encoding/json"
	"io"
	"net/http"
	"strings"
	"testing"
)

// TestReadiness checks GET /readyz against which backends answer: ready
// when both do, 503 naming the backend that does not, and the challenger
// not required while the ramp is 0 (no request would call it).
func TestReadiness(t *testing.T) {
	t.Parallel()
	cases := []struct {
		name           string
		incUp, chalUp  bool
		ramp           float64
		wantStatus     int
		wantNamed      string // in the 503's reason
		wantNotNamed   string // not in it
		wantReadyField bool
	}{
		{"both up", true, true, 1, http.StatusOK, "", "", true},
		{"incumbent down", false, true, 1, http.StatusServiceUnavailable, "incumbent", "challenger", false},
		{"challenger down", true, false, 1, http.StatusServiceUnavailable, "challenger", "incumbent", false},
		{"challenger down at ramp 0", true, false, 0, http.StatusOK, "", "", true},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			dir := t.TempDir()
			incURL, chalURL := downURL(t), downURL(t)
			if tc.incUp {
				incURL = newBackend(t, "incumbent", incumbentShelf, 0).URL
			}
			if tc.chalUp {
				chalURL = newBackend(t, "challenger", challengerShelf, 0).URL
			}
			c := newConf(dir, incURL, chalURL)
			c.Ramp = tc.ramp
			r := start(t, dir, c)
			status, body := do(t, http.MethodGet, r.adm+"/readyz")
			var got struct {
				Ready  bool
				Reason string
			}
			if err := json.Unmarshal(body, &got); err != nil {
				t.Fatalf("GET /readyz: body %s: %v", body, err)
			}
			if status != tc.wantStatus || got.Ready != tc.wantReadyField {
				t.Fatalf("GET /readyz: status %d ready %v (%s), want %d ready %v", status, got.Ready, got.Reason, tc.wantStatus, tc.wantReadyField)
			}
			if tc.wantNamed != "" && !strings.Contains(got.Reason, tc.wantNamed) {
				t.Errorf("GET /readyz reason %q, want it to name the %s", got.Reason, tc.wantNamed)
			}
			if tc.wantNotNamed != "" && strings.Contains(got.Reason, tc.wantNotNamed) {
				t.Errorf("GET /readyz reason %q names the %s, which is up", got.Reason, tc.wantNotNamed)
			}
			if status, body := do(t, http.MethodGet, r.adm+"/healthz"); status != http.StatusOK || strings.TrimSpace(string(body)) != "ok" {
				t.Errorf("GET /healthz: status %d body %q, want 200 ok whatever the backends", status, body)
			}
		})
	}
}

// TestStatusPageAndExperimentKeys checks that the admin listener serves
// the status page as HTML and that GET /api/v1/experiment has every key of
// the experiment status in DESIGN.md's Interface section, with the types
// that section gives.
func TestStatusPageAndExperimentKeys(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	inc := newBackend(t, "incumbent", incumbentShelf, 0)
	chal := newBackend(t, "challenger", challengerShelf, 0)
	r := start(t, dir, newConf(dir, inc.URL, chal.URL))
	mustRecommend(t, r.data, "shopper-1", "")

	checkStatusPage(t, r)

	var doc map[string]json.RawMessage
	getJSON(t, r.adm+"/api/v1/experiment", &doc)
	kinds := map[string]string{
		"experiment": "string", "policy": "string", "ramp": "number", "impressions": "number",
		"interleaved": "number", "with_feedback": "number", "wins": "object", "delta": "number",
		"ci": "array", "p_value": "number", "verdict": "string", "needed": "number", "eta": "string|null",
	}
	for key, want := range kinds {
		raw, ok := doc[key]
		if !ok {
			t.Errorf("/api/v1/experiment has no %q", key)
			continue
		}
		if got := jsonKind(raw); !strings.Contains(want, got) {
			t.Errorf("/api/v1/experiment %q is %s (%s), want %s", key, got, raw, want)
		}
	}
	var parts struct {
		Wins       map[string]json.RawMessage
		CI         []float64
		Experiment string
		Verdict    string
	}
	if err := json.Unmarshal(mustJSON(t, doc), &parts); err != nil {
		t.Fatal(err)
	}
	for _, k := range []string{"incumbent", "challenger", "tie"} {
		if raw, ok := parts.Wins[k]; !ok || jsonKind(raw) != "number" {
			t.Errorf("/api/v1/experiment wins.%s = %s, want a number", k, raw)
		}
	}
	if len(parts.CI) != 2 || parts.CI[0] > parts.CI[1] {
		t.Errorf("/api/v1/experiment ci = %v, want [lo, hi]", parts.CI)
	}
	if parts.Experiment != "spring-refresh" {
		t.Errorf("/api/v1/experiment experiment = %q, want spring-refresh", parts.Experiment)
	}
	verdicts := "challenger-better on-par incumbent-better undecided"
	if parts.Verdict == "" || !strings.Contains(verdicts, parts.Verdict) {
		t.Errorf("/api/v1/experiment verdict = %q, want one of %s", parts.Verdict, verdicts)
	}
}

// checkStatusPage checks that GET /status/ serves the status page as HTML.
func checkStatusPage(t *testing.T, r *running) {
	t.Helper()
	resp, err := client.Get(r.adm + "/status/")
	if err != nil {
		t.Fatalf("GET /status/: %v", err)
	}
	defer resp.Body.Close()
	page, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatalf("GET /status/: read: %v", err)
	}
	ct := resp.Header.Get("Content-Type")
	if resp.StatusCode != http.StatusOK || !strings.HasPrefix(ct, "text/html") ||
		!strings.Contains(strings.ToLower(string(page)), "<html") {
		t.Errorf("GET /status/: status %d, Content-Type %q, %d bytes; want 200 text/html holding <html",
			resp.StatusCode, ct, len(page))
	}
}

// jsonKind names the JSON type of a raw value.
func jsonKind(raw json.RawMessage) string {
	s := strings.TrimSpace(string(raw))
	switch {
	case s == "null":
		return "null"
	case s == "true" || s == "false":
		return "bool"
	case strings.HasPrefix(s, `"`):
		return "string"
	case strings.HasPrefix(s, "{"):
		return "object"
	case strings.HasPrefix(s, "["):
		return "array"
	}
	return "number"
}

// mustJSON marshals v or fails the test.
func mustJSON(t *testing.T, v any) []byte {
	t.Helper()
	b, err := json.Marshal(v)
	if err != nil {
		t.Fatal(err)
	}
	return b
}
