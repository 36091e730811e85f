package deploy

import (
	"testing"
)

// fuzzDB is a small series set that fuzzed expressions are evaluated on.
func fuzzDB() []sample { return fleet("fuzz", 3, 2, 1, 4) }

func FuzzParseExpr(f *testing.F) {
	for _, s := range []string{
		`sum without(instance, pod) (riffle_impression_outcomes_total)`,
		`sum by (experiment) (x{outcome=~"a|b"}) / (y > 0)`,
		`2^3^2 - -1`, `a or 0.5 * b{c!="d"}`, `sqrt(x) + 1e-3`, `sum(x) without (pod)`,
		`x{a="\"q\""}`, `(`, `x{a=~"("}`, `rate(x[5m])`,
	} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, src string) {
		n, err := parseExpr(src)
		if err != nil {
			return
		}
		_, _ = n(fuzzDB()) // must not panic
	})
}

func FuzzParseValues(f *testing.F) {
	for _, s := range []string{"0+5x10", "1-2x4", "_ 10x9", "_x3 1", "-2+4x3", "1e3", "x", "1+x", "3x-1"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		ps, err := parseValues(s)
		if err != nil {
			return
		}
		if len(ps) > 0 {
			_, _ = at(ps, 60e9, 600e9)
		}
	})
}

func FuzzParseSeries(f *testing.F) {
	for _, s := range []string{`up`, `a{b="c"}`, `a{b="c",d="e",}`, `a{`, `{b="c"}`, `a{b=c}`} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		ls, err := parseSeries(s)
		if err != nil {
			return
		}
		if ls["__name__"] == "" {
			t.Errorf("parseSeries(%q) accepted a series without a name", s)
		}
	})
}

func TestParseValues(t *testing.T) {
	const gap = -999
	// The expanding-notation examples of the Prometheus documentation on
	// unit testing rules (recalled from memory), and a gap.
	tests := []struct {
		in   string
		want []float64 // gap marks a missing sample
	}{
		{"-2+4x3", []float64{-2, 2, 6, 10}},
		{"1-2x4", []float64{1, -1, -3, -5, -7}},
		{"1x4", []float64{1, 1, 1, 1, 1}},
		{"1 _x3 5", []float64{1, gap, gap, gap, 5}},
		{"_ 2", []float64{gap, 2}},
	}
	for _, tt := range tests {
		ps, err := parseValues(tt.in)
		if err != nil {
			t.Fatalf("%q: %v", tt.in, err)
		}
		if len(ps) != len(tt.want) {
			t.Fatalf("%q: %d samples, want %d", tt.in, len(ps), len(tt.want))
		}
		for i, p := range ps {
			if (tt.want[i] == gap && p.ok) || (tt.want[i] != gap && (!p.ok || p.v != tt.want[i])) {
				t.Errorf("%q[%d] = %+v, want %v", tt.in, i, p, tt.want[i])
			}
		}
	}
}

func TestEvaluatorSemantics(t *testing.T) {
	db := fleet("e", 3, 2, 1, 4)
	tests := []struct {
		expr string
		want float64 // the single result's value
	}{
		{`sum without(instance, pod, outcome) (riffle_impression_outcomes_total{outcome=~"challenger|tie"})`, 4},
		{`sum(riffle_impression_outcomes_total{outcome!~"none"})`, 6},
		{`sum by (experiment) (riffle_impression_outcomes_total{outcome="none"}) * 2^3^0`, 8}, // 2^(3^0)
		{`sum(riffle_impression_outcomes_total) - -1`, 11},
		{`sum(riffle_impression_outcomes_total{outcome="challenger"} or riffle_impression_outcomes_total{outcome="tie"})`, 4},
		{`sum(riffle_impression_outcomes_total{outcome="none"} > 1)`, 3}, // pods hold 1 and 3
		{`sqrt(sum(riffle_impression_outcomes_total{outcome="none"}) * 4)`, 4},
	}
	for _, tt := range tests {
		n, err := parseExpr(tt.expr)
		if err != nil {
			t.Fatalf("%s: %v", tt.expr, err)
		}
		v, err := n(db)
		if err != nil {
			t.Fatalf("%s: %v", tt.expr, err)
		}
		if len(v.vec) != 1 || v.vec[0].v != tt.want {
			t.Errorf("%s = %+v, want one sample of %v", tt.expr, v.vec, tt.want)
		}
	}
	for _, bad := range []string{`rate(x[5m])`, `x{`, `1 > 2`, `sum(`, `x{a="b"`} {
		if n, err := parseExpr(bad); err == nil {
			if _, err := n(db); err == nil {
				t.Errorf("%s: accepted, want an error", bad)
			}
		}
	}
}
