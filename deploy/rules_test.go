package deploy

import (
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"github.com/goccy/go-yaml"
	"gonum.org/v1/gonum/stat/distuv"

	"riffle/merge/verdict"
)

// verdictGroup is the rule group that computes the fleet-wide verdict.
const verdictGroup = "riffle-fleet-verdict"

type rule struct {
	Record      string            `yaml:"record"`
	Alert       string            `yaml:"alert"`
	Expr        string            `yaml:"expr"`
	For         string            `yaml:"for"`
	Labels      map[string]string `yaml:"labels"`
	Annotations map[string]string `yaml:"annotations"`
}

type ruleFile struct {
	Groups []struct {
		Name     string `yaml:"name"`
		Interval string `yaml:"interval"`
		Rules    []rule `yaml:"rules"`
	} `yaml:"groups"`
}

type ruleTests struct {
	RuleFiles          []string `yaml:"rule_files"`
	EvaluationInterval string   `yaml:"evaluation_interval"`
	Tests              []struct {
		Interval    string `yaml:"interval"`
		InputSeries []struct {
			Series string `yaml:"series"`
			Values string `yaml:"values"`
		} `yaml:"input_series"`
		PromQLExprTest []struct {
			Expr       string `yaml:"expr"`
			EvalTime   string `yaml:"eval_time"`
			ExpSamples []struct {
				Labels string  `yaml:"labels"`
				Value  float64 `yaml:"value"`
			} `yaml:"exp_samples"`
		} `yaml:"promql_expr_test"`
		AlertRuleTest []any `yaml:"alert_rule_test"`
	} `yaml:"tests"`
}

// readYAML decodes a file strictly: unknown keys are errors.
func readYAML(t *testing.T, path string, v any) {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := yaml.UnmarshalWithOptions(b, v, yaml.Strict()); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
}

func verdictRules(t *testing.T) []rule {
	t.Helper()
	var rf ruleFile
	readYAML(t, filepath.Join("prometheus", "rules.yaml"), &rf)
	for _, g := range rf.Groups {
		if g.Name == verdictGroup {
			return g.Rules
		}
	}
	t.Fatalf("rules.yaml has no group %s", verdictGroup)
	return nil
}

// evalVerdict runs the verdict rules in order over db, as Prometheus does
// within one group evaluation (each rule sees the ones before it), and
// returns db with the recorded series added.
func evalVerdict(t *testing.T, rules []rule, db []sample) []sample {
	t.Helper()
	for _, r := range rules {
		out, err := record(r.Record, r.Expr, db)
		if err != nil {
			t.Fatal(err)
		}
		db = append(db, out...)
	}
	return db
}

func mustDuration(t *testing.T, s string) time.Duration {
	t.Helper()
	d, err := time.ParseDuration(s)
	if err != nil {
		t.Fatal(err)
	}
	return d
}

// TestVerdictRulesMeetRulesTestExpectations evaluates the verdict group on
// rules_test.yaml's input series and compares with its expected samples,
// the same check `promtool test rules` makes, without promtool.
func TestVerdictRulesMeetRulesTestExpectations(t *testing.T) {
	rules := verdictRules(t)
	recorded := map[string]bool{}
	for _, r := range rules {
		recorded[r.Record] = true
	}
	var rt ruleTests
	readYAML(t, filepath.Join("prometheus", "rules_test.yaml"), &rt)
	checked := 0
	for ti, tc := range rt.Tests {
		interval := mustDuration(t, tc.Interval)
		for _, et := range tc.PromQLExprTest {
			name := strings.TrimSpace(strings.SplitN(et.Expr, "{", 2)[0])
			if !recorded[name] {
				continue // rules of other groups need rate(): promtool checks those
			}
			db := inputAt(t, tc.InputSeries, interval, mustDuration(t, et.EvalTime))
			db = evalVerdict(t, rules, db)
			sel, err := parseExpr(et.Expr)
			if err != nil {
				t.Fatalf("test %d: %s: %v", ti, et.Expr, err)
			}
			got, err := sel(db)
			if err != nil {
				t.Fatal(err)
			}
			want := map[string]float64{}
			for _, s := range et.ExpSamples {
				ls, err := parseSeries(s.Labels)
				if err != nil {
					t.Fatal(err)
				}
				want[signature(ls)] = s.Value
			}
			if len(got.vec) != len(want) {
				t.Errorf("%s at %s: %d samples, want %d", et.Expr, et.EvalTime, len(got.vec), len(want))
			}
			for _, s := range got.vec {
				w, ok := want[signature(s.labels)]
				if !ok || !close(s.v, w, 1e-12) {
					t.Errorf("%s{%s} = %v, want %v (expected: %v)", name, signature(s.labels), s.v, w, ok)
				}
				checked++
			}
		}
	}
	if checked < 30 {
		t.Errorf("checked only %d samples; rules_test.yaml's verdict expectations went missing", checked)
	}
}

// inputAt returns the input series' samples at time t.
func inputAt(t *testing.T, in []struct {
	Series string `yaml:"series"`
	Values string `yaml:"values"`
}, interval, ts time.Duration) []sample {
	t.Helper()
	var db []sample
	for _, s := range in {
		ls, err := parseSeries(s.Series)
		if err != nil {
			t.Fatal(err)
		}
		ps, err := parseValues(s.Values)
		if err != nil {
			t.Fatal(err)
		}
		if v, ok := at(ps, interval, ts); ok {
			db = append(db, sample{labels: ls, v: v})
		}
	}
	return db
}

func close(got, want, tol float64) bool {
	return math.Abs(got-want) <= tol*math.Max(1, math.Abs(want))
}

// wilson is the Wilson (1927) score interval for k successes in n trials at
// normal quantile z, written as in Newcombe (1998), method 3:
// (2nP + z^2 -/+ z sqrt(z^2 + 4nPQ)) / (2(n + z^2)), P = k/n, Q = 1 - P.
// It is written differently from the rules on purpose.
func wilson(k, n, z float64) (lo, hi float64) {
	p := k / n
	q := 1 - p
	root := z * math.Sqrt(z*z+4*n*p*q)
	return (2*n*p + z*z - root) / (2 * (n + z*z)), (2*n*p + z*z + root) / (2 * (n + z*z))
}

// fleet builds the outcome counters of two sidecars that together hold
// the given counts, split unevenly between them.
func fleet(experiment string, challenger, incumbent, tie, none float64) []sample {
	var db []sample
	for outcome, total := range map[string]float64{"challenger": challenger, "incumbent": incumbent, "tie": tie, "none": none} {
		a := math.Floor(total * 0.3)
		for pod, v := range map[string]float64{"recs-a": a, "recs-b": total - a} {
			db = append(db, sample{labels: map[string]string{
				"__name__": "riffle_impression_outcomes_total", "job": "riffle", "instance": pod + ":7464",
				"pod": pod, "experiment": experiment, "outcome": outcome}, v: v})
		}
	}
	return db
}

// only returns the value of the one sample named name for experiment.
func only(t *testing.T, db []sample, name, experiment string) (float64, bool) {
	t.Helper()
	var found []float64
	for _, s := range db {
		if s.labels["__name__"] == name && s.labels["experiment"] == experiment {
			found = append(found, s.v)
		}
	}
	if len(found) > 1 {
		t.Fatalf("%d samples of %s for %s, want one fleet-wide", len(found), name, experiment)
	}
	if len(found) == 0 {
		return 0, false
	}
	return found[0], true
}

// TestWilsonRulesAgainstNewcombe feeds the worked examples of Newcombe,
// Statistics in Medicine 17 (1998) 857-872, Table I, method 3, through the
// rules as the counters of two sidecars (values recalled from memory of
// that paper, and checked against the reference wilson above).
func TestWilsonRulesAgainstNewcombe(t *testing.T) {
	rules := verdictRules(t)
	tests := []struct {
		k, n   float64
		lo, hi float64
	}{
		{81, 263, 0.2553, 0.3662},
		{15, 148, 0.0624, 0.1605},
		{0, 20, 0, 0.1611},
		{1, 29, 0.0061, 0.1718},
	}
	for _, tt := range tests {
		refLo, refHi := wilson(tt.k, tt.n, 1.959964)
		if math.Abs(refLo-tt.lo) > 5e-5 || math.Abs(refHi-tt.hi) > 5e-5 {
			t.Errorf("reference wilson(%v/%v) = %.4f to %.4f, Newcombe has %.4f to %.4f", tt.k, tt.n, refLo, refHi, tt.lo, tt.hi)
		}
		db := evalVerdict(t, rules, fleet("spring-refresh", tt.k, tt.n-tt.k, 0, 12))
		lo, okLo := only(t, db, "experiment:riffle_win_share_wilson_lower:ratio", "spring-refresh")
		hi, okHi := only(t, db, "experiment:riffle_win_share_wilson_upper:ratio", "spring-refresh")
		if !okLo || !okHi {
			t.Fatalf("%v/%v: no interval recorded", tt.k, tt.n)
		}
		if math.Abs(lo-tt.lo) > 5e-5 || math.Abs(hi-tt.hi) > 5e-5 {
			t.Errorf("rules' interval for %v/%v = %.4f to %.4f, Newcombe has %.4f to %.4f", tt.k, tt.n, lo, hi, tt.lo, tt.hi)
		}
		if !close(lo, refLo, 1e-12) || !close(hi, refHi, 1e-12) {
			t.Errorf("rules' interval for %v/%v = %v to %v, reference %v to %v", tt.k, tt.n, lo, hi, refLo, refHi)
		}
	}
}

// TestRulesMatchTheStatistics compares the recorded series with
// Delta = (wins + ties/2)/(wins + losses + ties) - 0.5 (Chapelle, Joachims,
// Radlinski & Yue, ACM TOIS 30(1), 2012) computed directly, and with the
// statistics package's status for the same counts, every user having one
// impression (design effect 1, which is all Prometheus can know): its
// delta, ci (the interval for Delta), win_share and wilson.
func TestRulesMatchTheStatistics(t *testing.T) {
	rules := verdictRules(t)
	tests := []struct {
		name                        string
		challenger, incumbent, ties int64
	}{
		{"ties", 40, 30, 20},
		{"challenger ahead", 1210, 980, 333},
		{"incumbent only", 0, 17, 0},
		{"challenger only", 5, 0, 0},
		{"ties only", 0, 0, 9},
		{"Newcombe's 81 of 263", 81, 182, 0},
		{"large", 412_345, 398_765, 120_001},
		{"nothing decided", 0, 0, 0},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			w, l, ti := float64(tt.challenger), float64(tt.incumbent), float64(tt.ties)
			db := evalVerdict(t, rules, fleet("autumn-bulbs", w, l, ti, 50))
			get := func(name string) (float64, bool) {
				return only(t, db, "experiment:riffle_"+name+":ratio", "autumn-bulbs")
			}
			st, err := verdict.Compute(verdict.Input{Experiment: "autumn-bulbs",
				Outcomes: [4]int64{50, tt.incumbent, tt.challenger, tt.ties}})
			if err != nil {
				t.Fatal(err)
			}
			n := w + l + ti
			delta, ok := get("delta")
			if n == 0 {
				if ok {
					t.Errorf("Delta %v recorded with nothing decided, want no series", delta)
				}
				return
			}
			if want := (w+ti/2)/n - 0.5; !ok || !close(delta, want, 1e-12) || !close(delta, st.Delta, 1e-12) {
				t.Errorf("Delta = %v (recorded %v), want %v; statistics say %v", delta, ok, want, st.Delta)
			}
			// The rules' interval is the large-sample score interval with
			// the observed tie share; the statistics' ci adds a continuity
			// correction of 1/(4N) and the tie share estimated under each
			// r, so the two agree to within about 1/N, and the rules'
			// collapses to a point when every impression tied.
			lo, _ := get("delta_lower")
			hi, _ := get("delta_upper")
			if tt.ties < int64(n) && (math.Abs(lo-st.CI.Lo()) > 1/n || math.Abs(hi-st.CI.Hi()) > 1/n) {
				t.Errorf("Delta interval = %v to %v, statistics' ci %v: want within 1/N = %v", lo, hi, st.CI, 1/n)
			}
			if lo < st.CI.Lo()-1e-7 || hi > st.CI.Hi()+1e-7 {
				t.Errorf("Delta interval = %v to %v wider than the statistics' ci %v", lo, hi, st.CI)
			}
			if rlo, rhi := scoreWithTies(w, l, ti, 1.959964); !close(lo, rlo-0.5, 1e-9) || !close(hi, rhi-0.5, 1e-9) {
				t.Errorf("Delta interval = %v to %v, want the closed form %v to %v less 0.5", lo, hi, rlo, rhi)
			}
			if tt.ties == 0 {
				rlo, rhi := wilson(w, n, 1.959964)
				if !close(lo, rlo-0.5, 1e-12) || !close(hi, rhi-0.5, 1e-12) {
					t.Errorf("without ties the Delta interval %v to %v should be Wilson's %v to %v less 0.5", lo, hi, rlo, rhi)
				}
			}
			share, ok := get("challenger_win_share")
			if w+l == 0 {
				if ok {
					t.Errorf("win share %v recorded with no decisive impression, want no series", share)
				}
				return
			}
			wlo, _ := get("win_share_wilson_lower")
			whi, _ := get("win_share_wilson_upper")
			if !close(share, st.WinShare, 1e-12) || math.Abs(wlo-st.Wilson.Lo()) > 1e-7 || math.Abs(whi-st.Wilson.Hi()) > 1e-7 {
				t.Errorf("win share %v, Wilson %v to %v; statistics say %v, %v", share, wlo, whi, st.WinShare, st.Wilson)
			}
		})
	}
}

// TestRulesZIsTheNormalQuantile checks every z in rules.yaml is the
// two-sided 95% normal quantile, against gonum.
func TestRulesZIsTheNormalQuantile(t *testing.T) {
	b, err := os.ReadFile(filepath.Join("prometheus", "rules.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	zs := regexp.MustCompile(`\b1\.9\d+\b`).FindAllString(string(b), -1)
	if len(zs) < 6 {
		t.Fatalf("found %d z literals, want the six of the two interval rules (and the comments)", len(zs))
	}
	q := distuv.UnitNormal.Quantile(0.975)
	for _, z := range zs {
		if z != "1.959964" {
			t.Errorf("z literal %s, want 1.959964", z)
		}
	}
	if math.Abs(1.959964-q) > 5e-7 {
		t.Errorf("1.959964 is not gonum's 0.975 normal quantile %v to six decimals", q)
	}
}

// scoreWithTies is the closed form the rules implement: the r with
// (R - r)^2 <= c (r(1-r) - t/4), c = z^2/N, t the observed tie share.
func scoreWithTies(w, l, ti, z float64) (float64, float64) {
	n := w + l + ti
	r, t := (w+ti/2)/n, ti/n
	c := z * z / n
	root := math.Sqrt(max(0, c*(4*r*(1-r)-t+c*(1-t))))
	return max(0, (2*r+c-root)/(2*(1+c))), min(1, (2*r+c+root)/(2*(1+c)))
}
