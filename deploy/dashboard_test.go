package deploy

import (
	"encoding/json"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strings"
	"testing"

	"github.com/prometheus/client_golang/prometheus"

	"riffle/proxy/guard"
)

type dashboard struct {
	Title      string `json:"title"`
	UID        string `json:"uid"`
	Templating struct {
		List []struct {
			Name string `json:"name"`
		} `json:"list"`
	} `json:"templating"`
	Panels []struct {
		ID          int    `json:"id"`
		Type        string `json:"type"`
		Title       string `json:"title"`
		Description string `json:"description"`
		GridPos     struct {
			H, W, X, Y int
		} `json:"gridPos"`
		Targets []struct {
			RefID string `json:"refId"`
			Expr  string `json:"expr"`
		} `json:"targets"`
	} `json:"panels"`
}

func readDashboard(t *testing.T) dashboard {
	t.Helper()
	b, err := os.ReadFile(filepath.Join("dashboards", "riffle.json"))
	if err != nil {
		t.Fatal(err)
	}
	var d dashboard
	dec := json.NewDecoder(strings.NewReader(string(b)))
	if err := dec.Decode(&d); err != nil {
		t.Fatalf("riffle.json: %v", err)
	}
	return d
}

// exportedMetrics are the series riffle's packages export, as the design
// (issue 5) names them; the guardrail ones are also gathered from a real
// guard below. Rules and panels may use only these, their histogram
// suffixes, Prometheus's own up, and the recorded series.
func exportedMetrics() []string {
	return []string{
		"riffle_impression_outcomes_total", "riffle_experiment_ramp_ratio",
		"riffle_backend_request_duration_seconds", "riffle_backend_errors_total",
		"riffle_proxy_requests_total", "riffle_proxy_request_duration_seconds",
		"riffle_store_impressions_dropped_total", "riffle_store_queue_length",
		"riffle_store_commit_duration_seconds", "riffle_config_reloads_total",
		"riffle_guardrail_tripped", "riffle_guardrail_trips_total", "up",
	}
}

// metricNames pulls the metric names out of an expression: identifiers
// outside strings that look like riffle series or recorded series.
func metricNames(expr string) []string {
	unquoted := regexp.MustCompile(`"(\\.|[^"\\])*"`).ReplaceAllString(expr, `""`)
	return regexp.MustCompile(`\b(riffle_[a-z_]+|[a-z_]+:[a-z_:0-9]+|up)\b`).FindAllString(unquoted, -1)
}

func knownName(name string, recorded map[string]bool) bool {
	if recorded[name] {
		return true
	}
	for _, suffix := range []string{"", "_bucket", "_count", "_sum"} {
		if base, ok := strings.CutSuffix(name, suffix); ok && slices.Contains(exportedMetrics(), base) {
			return true
		}
	}
	return false
}

func recordedNames(t *testing.T) map[string]bool {
	t.Helper()
	var rf ruleFile
	readYAML(t, filepath.Join("prometheus", "rules.yaml"), &rf)
	names := map[string]bool{}
	for _, g := range rf.Groups {
		for _, r := range g.Rules {
			if r.Record != "" {
				names[r.Record] = true
			}
		}
	}
	return names
}

func TestDashboardPanels(t *testing.T) {
	d := readDashboard(t)
	recorded := recordedNames(t)
	vars := map[string]bool{}
	for _, v := range d.Templating.List {
		vars[v.Name] = true
	}
	ids := map[int]bool{}
	var exprs []string
	for _, p := range d.Panels {
		if ids[p.ID] {
			t.Errorf("panel id %d used twice", p.ID)
		}
		ids[p.ID] = true
		if p.Title == "" || p.Description == "" || len(p.Targets) == 0 {
			t.Errorf("panel %d %q needs a title, a description and a query", p.ID, p.Title)
		}
		// The dashboard grid is 24 columns wide (common practice for this format).
		if p.GridPos.W <= 0 || p.GridPos.X+p.GridPos.W > 24 {
			t.Errorf("panel %q lies outside the 24-column grid: %+v", p.Title, p.GridPos)
		}
		for _, tg := range p.Targets {
			exprs = append(exprs, tg.Expr)
			for _, name := range metricNames(tg.Expr) {
				if !knownName(name, recorded) {
					t.Errorf("panel %q queries %s, which nothing exports or records", p.Title, name)
				}
			}
			for _, m := range regexp.MustCompile(`\$\{?(\w+)`).FindAllStringSubmatch(tg.Expr, -1) {
				if !vars[m[1]] {
					t.Errorf("panel %q uses $%s, which the dashboard does not define", p.Title, m[1])
				}
			}
		}
	}
	all := strings.Join(exprs, "\n")
	for what, needle := range map[string]string{
		"Delta":            "experiment:riffle_delta:ratio",
		"interval (lower)": "experiment:riffle_delta_lower:ratio",
		"interval (upper)": "experiment:riffle_delta_upper:ratio",
		"ramp":             "riffle_experiment_ramp_ratio",
		"outcomes":         "experiment_outcome:riffle_impression_outcomes:sum",
		"latency":          "riffle_backend_request_duration_seconds_bucket",
		"errors":           "riffle_backend_errors_total",
	} {
		if !strings.Contains(all, needle) {
			t.Errorf("no panel shows %s (%s)", what, needle)
		}
	}
}

func TestRulesUseExportedMetrics(t *testing.T) {
	var rf ruleFile
	readYAML(t, filepath.Join("prometheus", "rules.yaml"), &rf)
	recorded := recordedNames(t)
	for _, g := range rf.Groups {
		for _, r := range g.Rules {
			for _, name := range metricNames(r.Expr) {
				if !knownName(name, recorded) {
					t.Errorf("rule %s%s uses %s, which nothing exports or records", r.Record, r.Alert, name)
				}
			}
			switch {
			case r.Record != "" && strings.Count(r.Record, ":") != 2:
				// Prometheus's naming practice for recording rules: level:metric:operations.
				t.Errorf("recorded name %s is not level:metric:operations", r.Record)
			case r.Alert != "" && (r.Labels["severity"] == "" || r.Annotations["summary"] == ""):
				t.Errorf("alert %s needs a severity label and a summary", r.Alert)
			}
		}
	}
}

// TestGuardrailMetricNamesMatchTheGuard gathers a real guard's metrics, so
// a renamed guardrail series breaks the alert rather than silencing it.
func TestGuardrailMetricNamesMatchTheGuard(t *testing.T) {
	reg := prometheus.NewRegistry()
	guard.New(guard.Options{Registerer: reg})
	mfs, err := reg.Gather()
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, mf := range mfs {
		got = append(got, mf.GetName())
		if !slices.Contains(exportedMetrics(), mf.GetName()) {
			t.Errorf("the guard exports %s, which this test's list lacks", mf.GetName())
		}
	}
	if !slices.Contains(got, "riffle_guardrail_tripped") {
		t.Errorf("the guard exports %v, without riffle_guardrail_tripped that the alert uses", got)
	}
}

func TestMetricNames(t *testing.T) {
	got := metricNames(`sum(rate(riffle_x_total{a="riffle_y", b="up"}[5m])) / job:foo:rate5m + up`)
	want := []string{"riffle_x_total", "job:foo:rate5m", "up"}
	if !slices.Equal(got, want) {
		t.Errorf("metricNames = %q, want %q", got, want)
	}
}
