package sidecar_test

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"strings"
	"testing"
	"time"

	dto "github.com/prometheus/client_model/go"
	"github.com/prometheus/common/expfmt"
	"github.com/prometheus/common/model"

	"riffle/proxy/config"
	"riffle/proxy/feedback"
)

// client is the tests' HTTP client; every call has a deadline.
var client = &http.Client{Timeout: 10 * time.Second}

// answer is one recommendation response as a client saw it.
type answer struct {
	status     int
	impression string
	model      string
	skus       []string
	err        error
}

// interleaved reports whether the answer holds items from both shelves.
func (a answer) interleaved() bool {
	var inc, chal bool
	for _, s := range a.skus {
		if isChallengerItem(s) {
			chal = true
		} else {
			inc = true
		}
	}
	return inc && chal
}

// recommend asks the data plane for recommendations as user; query is
// appended to the path (without "?"), and extra headers are set.
func recommend(ctx context.Context, data, user, query string, header http.Header) answer {
	u := data + "/v1/recommend"
	if query != "" {
		u += "?" + query
	}
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, u, nil)
	if err != nil {
		return answer{err: err}
	}
	for k, v := range header {
		req.Header[k] = v
	}
	if user != "" {
		req.Header.Set("Shopper-Id", user)
	}
	resp, err := client.Do(req)
	if err != nil {
		return answer{err: err}
	}
	defer resp.Body.Close()
	a := answer{status: resp.StatusCode, impression: resp.Header.Get("Riffle-Impression")}
	var doc struct {
		Model string `json:"model"`
		Items []struct {
			SKU string `json:"sku"`
		} `json:"items"`
	}
	if err := json.NewDecoder(resp.Body).Decode(&doc); err != nil {
		a.err = fmt.Errorf("decode answer (status %d): %w", resp.StatusCode, err)
		return a
	}
	a.model = doc.Model
	for _, it := range doc.Items {
		a.skus = append(a.skus, it.SKU)
	}
	return a
}

// mustRecommend is recommend that fails the test on anything but a 200
// with an impression id and a list.
func mustRecommend(t *testing.T, data, user, query string) answer {
	t.Helper()
	a := recommend(context.Background(), data, user, query, nil)
	if a.err != nil || a.status != http.StatusOK || a.impression == "" || len(a.skus) == 0 {
		t.Fatalf("GET /v1/recommend as %q: status %d, impression %q, %d items, err %v; want 200 with an impression and items",
			user, a.status, a.impression, len(a.skus), a.err)
	}
	return a
}

// event is one line of a feedback body.
func event(impression, item, typ string) string {
	b, _ := json.Marshal(map[string]string{"impression": impression, "item": item, "event": typ})
	return string(b)
}

// postFeedback sends body to POST /feedback and decodes the answer.
func postFeedback(ctx context.Context, data, body string) (int, feedback.Response, error) {
	req, err := http.NewRequestWithContext(ctx, http.MethodPost, data+"/feedback", strings.NewReader(body))
	if err != nil {
		return 0, feedback.Response{}, err
	}
	req.Header.Set("Content-Type", "application/x-ndjson")
	resp, err := client.Do(req)
	if err != nil {
		return 0, feedback.Response{}, err
	}
	defer resp.Body.Close()
	var fr feedback.Response
	if err := json.NewDecoder(resp.Body).Decode(&fr); err != nil {
		return resp.StatusCode, fr, fmt.Errorf("decode feedback answer: %w", err)
	}
	return resp.StatusCode, fr, nil
}

// do sends a request to url and returns the status and body.
func do(t *testing.T, method, url string) (int, []byte) {
	t.Helper()
	req, err := http.NewRequest(method, url, nil)
	if err != nil {
		t.Fatalf("%s %s: %v", method, url, err)
	}
	resp, err := client.Do(req)
	if err != nil {
		t.Fatalf("%s %s: %v", method, url, err)
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(resp.Body)
	if err != nil {
		t.Fatalf("%s %s: read body: %v", method, url, err)
	}
	return resp.StatusCode, b
}

// getJSON GETs url, wants 200 and decodes the body into v.
func getJSON(t *testing.T, url string, v any) {
	t.Helper()
	status, body := do(t, http.MethodGet, url)
	if status != http.StatusOK {
		t.Fatalf("GET %s: status %d, want 200; body %s", url, status, body)
	}
	if err := json.Unmarshal(body, v); err != nil {
		t.Fatalf("GET %s: decode %s: %v", url, body, err)
	}
}

// experimentStatus is the part of GET /api/v1/experiment the tests read.
type experimentStatus struct {
	Experiment   string   `json:"experiment"`
	Ramp         *float64 `json:"ramp"`
	Impressions  int64    `json:"impressions"`
	Interleaved  int64    `json:"interleaved"`
	WithFeedback int64    `json:"with_feedback"`
	Wins         struct {
		Incumbent, Challenger, Tie int64
	} `json:"wins"`
	Delta     float64 `json:"delta"`
	Guardrail struct {
		Tripped   bool   `json:"tripped"`
		Guardrail string `json:"guardrail"`
		Reason    string `json:"reason"`
	} `json:"guardrail"`
}

// experiment GETs /api/v1/experiment.
func (r *running) experiment(t *testing.T) experimentStatus {
	t.Helper()
	var st experimentStatus
	getJSON(t, r.adm+"/api/v1/experiment", &st)
	return st
}

// configView is the part of GET /api/v1/config the tests read.
type configView struct {
	Hash      string           `json:"hash"`
	LastError string           `json:"last_error"`
	Problems  []config.Problem `json:"problems"`
}

// configView GETs /api/v1/config.
func (r *running) configView(t *testing.T) configView {
	t.Helper()
	var cv configView
	getJSON(t, r.adm+"/api/v1/config", &cv)
	return cv
}

// scrape is one GET /metrics, as text and parsed.
type scrape struct {
	text []byte
	fams map[string]*dto.MetricFamily
}

// scrape GETs /metrics and parses the Prometheus text format.
func (r *running) scrape(t *testing.T) scrape {
	t.Helper()
	status, body := do(t, http.MethodGet, r.adm+"/metrics")
	if status != http.StatusOK {
		t.Fatalf("GET /metrics: status %d, want 200", status)
	}
	p := expfmt.NewTextParser(model.UTF8Validation)
	fams, err := p.TextToMetricFamilies(bytes.NewReader(body))
	if err != nil {
		t.Fatalf("GET /metrics: not the Prometheus text format: %v", err)
	}
	return scrape{text: body, fams: fams}
}

// series returns the metrics of family name whose labels include want.
func (s scrape) series(name string, want map[string]string) []*dto.Metric {
	f := s.fams[name]
	if f == nil {
		return nil
	}
	var out []*dto.Metric
	for _, m := range f.GetMetric() {
		have := map[string]string{}
		for _, lp := range m.GetLabel() {
			have[lp.GetName()] = lp.GetValue()
		}
		ok := true
		for k, v := range want {
			if have[k] != v {
				ok = false
			}
		}
		if ok {
			out = append(out, m)
		}
	}
	return out
}

// value sums the counter, gauge or untyped values of the matching series,
// or the sample counts for a histogram; -1 when no series matches, so that
// a missing series never passes for a zero.
func (s scrape) value(name string, labels map[string]string) float64 {
	ms := s.series(name, labels)
	if len(ms) == 0 {
		return -1
	}
	var sum float64
	for _, m := range ms {
		switch {
		case m.Counter != nil:
			sum += m.Counter.GetValue()
		case m.Gauge != nil:
			sum += m.Gauge.GetValue()
		case m.Histogram != nil:
			sum += float64(m.Histogram.GetSampleCount())
		case m.Untyped != nil:
			sum += m.Untyped.GetValue()
		}
	}
	return sum
}

// metricCheck is one expected value in a scrape (see scrape.value).
type metricCheck struct {
	name   string
	labels labels
	want   float64
}

// check reports every metricCheck the scrape does not meet.
func (s scrape) check(t *testing.T, checks []metricCheck) {
	t.Helper()
	for _, ck := range checks {
		if got := s.value(ck.name, ck.labels); got != ck.want {
			t.Errorf("%s%v = %v, want %v", ck.name, ck.labels, got, ck.want)
		}
	}
}
