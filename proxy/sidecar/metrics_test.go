package sidecar_test

import (
	"bytes"
	"context"
	"fmt"
	"math"
	"net/http"
	"strings"
	"testing"
	"time"

	"github.com/prometheus/client_golang/prometheus/testutil/promlint"

	"riffle/store"
)

// feedbackPlan says what the shoppers of the interleaved impressions do,
// in order: each entry is the events sent on one impression, as "c" for a
// click and "p" for a purchase on an item of the incumbent ("I") or the
// challenger ("C"). The outcomes follow team-draft's credit rule
// (Radlinski, Kurup & Joachims, CIKM 2008: each side is credited with the
// events on the slots its team contributed, the side with more credit wins,
// equal non-zero credit is a tie), with the configured weights click 1 and
// purchase 3.
var feedbackPlan = []struct {
	events []string
	want   string // outcome
}{
	{[]string{"cC"}, "challenger"}, {[]string{"cC"}, "challenger"}, {[]string{"cC"}, "challenger"},
	{[]string{"cC"}, "challenger"}, {[]string{"cC"}, "challenger"}, {[]string{"cC"}, "challenger"},
	{[]string{"cC"}, "challenger"}, {[]string{"cC"}, "challenger"},
	{[]string{"cI"}, "incumbent"}, {[]string{"cI"}, "incumbent"}, {[]string{"cI"}, "incumbent"},
	{[]string{"cI", "cC"}, "tie"}, {[]string{"cI", "cC"}, "tie"}, {[]string{"cI", "cC"}, "tie"},
	// A purchase weighs three clicks, so it outweighs the other side's click.
	{[]string{"cC", "pI"}, "incumbent"}, {[]string{"cC", "pI"}, "incumbent"},
	{nil, "none"}, {nil, "none"}, {nil, "none"}, {nil, "none"},
}

// TestMetricsAfterTrafficAndFeedback sends real traffic and feedback
// through a running sidecar, waits for the impressions' outcomes, and
// checks the counters of one scrape of GET /metrics against what was sent.
func TestMetricsAfterTrafficAndFeedback(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	inc := newBackend(t, "incumbent", incumbentShelf, 0)
	chal := newBackend(t, "challenger", challengerShelf, 0)
	c := newConf(dir, inc.URL, chal.URL)
	c.Window = 1500 * time.Millisecond
	r := start(t, dir, c)

	shown, alone := serveImpressions(t, r)
	clicks, purchases := sendPlannedFeedback(t, r, shown, alone)
	wantOutcomes := map[string]float64{"challenger": 0, "incumbent": 0, "tie": 0, "none": 0}
	for _, p := range feedbackPlan {
		wantOutcomes[p.want]++
	}
	w, l, ties := wantOutcomes["challenger"], wantOutcomes["incumbent"], wantOutcomes["tie"]
	// Delta = (wins + ties/2) / (wins + losses + ties) - 0.5, the preference
	// statistic of Chapelle, Joachims, Radlinski & Yue (TOIS 2012).
	wantDelta := (w+ties/2)/(w+l+ties) - 0.5

	// The store finalises an impression once its window has closed (a pass
	// every second); the Delta gauge is sampled every 5 seconds.
	var sc scrape
	eventually(t, 15*time.Second, func() (bool, string) {
		sc = r.scrape(t)
		n := sc.value("riffle_impression_outcomes_total", labels{"experiment": "spring-refresh"})
		d := sc.value("riffle_experiment_delta", labels{"experiment": "spring-refresh"})
		return n == float64(len(feedbackPlan)) && math.Abs(d-wantDelta) < 1e-9,
			fmt.Sprintf("outcomes total %v (want %d), delta gauge %v (want %v)", n, len(feedbackPlan), d, wantDelta)
	})

	sc.check(t, trafficWants(r.configView(t).Hash, clicks, purchases, wantOutcomes))
	lo := sc.value("riffle_experiment_delta_lower", labels{"experiment": "spring-refresh"})
	hi := sc.value("riffle_experiment_delta_upper", labels{"experiment": "spring-refresh"})
	if !(lo < wantDelta && wantDelta < hi) {
		t.Errorf("Delta interval gauges [%v, %v] do not contain Delta %v", lo, hi, wantDelta)
	}

	st := r.experiment(t)
	if st.Wins.Challenger != int64(w) || st.Wins.Incumbent != int64(l) || st.Wins.Tie != int64(ties) ||
		math.Abs(st.Delta-wantDelta) > 1e-9 {
		t.Errorf("/api/v1/experiment wins %+v delta %v, want challenger %v incumbent %v tie %v delta %v",
			st.Wins, st.Delta, w, l, ties, wantDelta)
	}
	if st.Impressions != 24 || st.Interleaved != 20 || st.WithFeedback != 16 {
		t.Errorf("/api/v1/experiment impressions %d interleaved %d with_feedback %d, want 24, 20, 16",
			st.Impressions, st.Interleaved, st.WithFeedback)
	}
	lintRiffleMetrics(t, sc.text)
}

// trafficWants are the metric values after the metrics test's traffic and
// feedback: 24 requests (20 interleaved, 4 with the challenger failing),
// the feedback sendPlannedFeedback sent and the outcomes of feedbackPlan.
func trafficWants(hash string, clicks, purchases float64, outcomes map[string]float64) []metricCheck {
	route := labels{"route": "/v1/recommend"}
	return []metricCheck{
		{"riffle_proxy_requests_total", labels{"route": "/v1/recommend", "outcome": "interleaved", "reason": "none"}, 20},
		{"riffle_proxy_requests_total", labels{"route": "/v1/recommend", "outcome": "incumbent-only", "reason": "challenger-status"}, 4},
		{"riffle_proxy_requests_total", route, 24},
		{"riffle_proxy_request_duration_seconds", route, 24},
		{"riffle_backend_request_duration_seconds", labels{"backend": "incumbent"}, 24},
		{"riffle_backend_request_duration_seconds", labels{"backend": "challenger"}, 24},
		{"riffle_backend_errors_total", labels{"backend": "challenger", "kind": "status"}, 4},
		{"riffle_backend_errors_total", labels{"backend": "challenger"}, 4},
		{"riffle_backend_errors_total", labels{"backend": "incumbent"}, 0},
		{"riffle_store_impressions_queued_total", nil, 24},
		{"riffle_store_impressions_committed_total", nil, 24},
		{"riffle_store_impressions_dropped_total", nil, 0},
		{"riffle_feedback_events_accepted_total", labels{"event": "click"}, clicks},
		{"riffle_feedback_events_accepted_total", labels{"event": "purchase"}, purchases},
		{"riffle_feedback_events_rejected_total", labels{"reason": "malformed"}, 1},
		{"riffle_feedback_events_rejected_total", labels{"reason": "unknown-impression"}, 1},
		{"riffle_feedback_events_rejected_total", labels{"reason": "item-not-shown"}, 1},
		{"riffle_feedback_events_rejected_total", labels{"reason": "unknown-event"}, 1},
		{"riffle_feedback_events_rejected_total", labels{"reason": "duplicate"}, 1},
		{"riffle_feedback_events_rejected_total", nil, 5},
		{"riffle_impression_outcomes_total", labels{"experiment": "spring-refresh", "outcome": "challenger"}, outcomes["challenger"]},
		{"riffle_impression_outcomes_total", labels{"experiment": "spring-refresh", "outcome": "incumbent"}, outcomes["incumbent"]},
		{"riffle_impression_outcomes_total", labels{"experiment": "spring-refresh", "outcome": "tie"}, outcomes["tie"]},
		{"riffle_impression_outcomes_total", labels{"experiment": "spring-refresh", "outcome": "none"}, outcomes["none"]},
		{"riffle_experiment_ramp_ratio", labels{"experiment": "spring-refresh"}, 1},
		{"riffle_config_info", labels{"hash": hash}, 1},
		{"riffle_config_info", nil, 1}, // one series: the config in force
		{"riffle_config_reloads_total", labels{"result": "success"}, 0},
		{"riffle_config_reloads_total", labels{"result": "failure"}, 0},
		{"riffle_guardrail_tripped", nil, 0},
	}
}

// serveImpressions asks for 20 interleaved lists, then 4 with the
// challenger answering 500, and checks what each answer holds.
func serveImpressions(t *testing.T, r *running) (shown, alone []answer) {
	t.Helper()
	for i := range len(feedbackPlan) {
		a := mustRecommend(t, r.data, fmt.Sprintf("shopper-%02d", i), "")
		if !a.interleaved() {
			t.Fatalf("request %d at ramp 1: items %v, want both shelves", i, a.skus)
		}
		shown = append(shown, a)
	}
	for i := range 4 {
		a := mustRecommend(t, r.data, fmt.Sprintf("shopper-x%d", i), "fail=challenger")
		if a.interleaved() || a.model != "incumbent" {
			t.Fatalf("request with a failing challenger: model %q, items %v, want the incumbent's list alone", a.model, a.skus)
		}
		alone = append(alone, a)
	}
	return shown, alone
}

// sendPlannedFeedback posts feedbackPlan's events for the interleaved
// answers, one click on an incumbent-only answer, and bad lines of every
// kind, in one NDJSON body; then a duplicate in a second. It checks both
// answers and returns the clicks and purchases accepted.
func sendPlannedFeedback(t *testing.T, r *running, shown, alone []answer) (clicks, purchases float64) {
	t.Helper()
	var lines []string
	for i, p := range feedbackPlan {
		for _, e := range p.events {
			item := firstOf(shown[i].skus, e[1] == 'C')
			typ := map[byte]string{'c': "click", 'p': "purchase"}[e[0]]
			lines = append(lines, event(shown[i].impression, item, typ))
			if typ == "click" {
				clicks++
			} else {
				purchases++
			}
		}
	}
	// A click on an incumbent-only impression is accepted but is no outcome:
	// only interleaved impressions compare the two models.
	lines = append(lines, event(alone[0].impression, alone[0].skus[0], "click"))
	clicks++
	good := len(lines)
	never := store.NewID(time.Now()).String()
	lines = append(lines,
		`{"impression": "`+shown[0].impression+`", "item": `,     // malformed: line good+1
		event(never, "GS-0001", "click"),                         // unknown impression
		event(shown[1].impression, "GS-9999", "click"),           // item not shown
		event(shown[2].impression, shown[2].skus[0], "wishlist"), // unknown event type
	)
	status, fr, err := postFeedback(context.Background(), r.data, strings.Join(lines, "\n")+"\n")
	if err != nil || status != http.StatusAccepted {
		t.Fatalf("POST /feedback: status %d, err %v, want 202", status, err)
	}
	if fr.Accepted != good || fr.Duplicates != 0 || len(fr.Rejected) != 4 {
		t.Fatalf("POST /feedback: accepted %d duplicates %d rejected %+v, want %d, 0 and 4 rejections",
			fr.Accepted, fr.Duplicates, fr.Rejected, good)
	}
	for i, rej := range fr.Rejected {
		if want := good + 1 + i; rej.Line != want {
			t.Errorf("rejection %d is for line %d, want line %d (%s)", i, rej.Line, want, rej.Error)
		}
	}
	status, fr, err = postFeedback(context.Background(), r.data, lines[0]+"\n")
	if err != nil || status != http.StatusAccepted || fr.Accepted != 0 || fr.Duplicates != 1 {
		t.Fatalf("POST /feedback of a replayed line: status %d accepted %d duplicates %d err %v, want 202, 0, 1",
			status, fr.Accepted, fr.Duplicates, err)
	}
	return clicks, purchases
}

// firstOf returns the first item in skus from the challenger's shelf when
// challenger is true, else the first from the incumbent's.
func firstOf(skus []string, challenger bool) string {
	for _, s := range skus {
		if isChallengerItem(s) == challenger {
			return s
		}
	}
	return ""
}

// lintRiffleMetrics runs promlint, the Prometheus client library's linter
// for metric names, types, units and help, over a scrape and fails on any
// problem with a riffle_ metric.
func lintRiffleMetrics(t *testing.T, text []byte) {
	t.Helper()
	problems, err := promlint.New(bytes.NewReader(text)).Lint()
	if err != nil {
		t.Fatalf("promlint: %v", err)
	}
	n := 0
	for _, p := range problems {
		if strings.HasPrefix(p.Metric, "riffle_") {
			t.Errorf("promlint: %s: %s", p.Metric, p.Text)
			n++
		}
	}
	if !bytes.Contains(text, []byte("riffle_proxy_requests_total")) {
		t.Errorf("the scrape has no riffle_ metrics to lint")
	}
	t.Logf("promlint: %d problems with riffle_ metrics, %d in all", n, len(problems))
}
