package deploy

import (
	"fmt"
	"maps"
	"math"
	"slices"
	"strings"
)

// signature identifies a sample's labels other than the metric name, for
// one-to-one vector matching.
func signature(ls map[string]string) string {
	keys := slices.Sorted(maps.Keys(ls))
	var b strings.Builder
	for _, k := range keys {
		if k != "__name__" {
			fmt.Fprintf(&b, "%s=%q,", k, ls[k])
		}
	}
	return b.String()
}

func withoutName(ls map[string]string) map[string]string {
	out := maps.Clone(ls)
	delete(out, "__name__")
	return out
}

func mapVec(v value, f func(float64) float64) value {
	out := value{}
	for _, s := range v.vec {
		out.vec = append(out.vec, sample{labels: withoutName(s.labels), v: f(s.v)})
	}
	return out
}

func sumVec(in []sample, mode string, labels []string) value {
	groups := map[string]*sample{}
	var order []string
	for _, s := range in {
		ls := map[string]string{}
		for k, v := range s.labels {
			keep := !slices.Contains(labels, k)
			if mode == "by" {
				keep = slices.Contains(labels, k)
			} else if mode == "" {
				keep = false
			}
			if keep && k != "__name__" {
				ls[k] = v
			}
		}
		sig := signature(ls)
		if g, ok := groups[sig]; ok {
			g.v += s.v
			continue
		}
		groups[sig] = &sample{labels: ls, v: s.v}
		order = append(order, sig)
	}
	out := value{}
	for _, sig := range order {
		out.vec = append(out.vec, *groups[sig])
	}
	return out
}

// arith applies an arithmetic operator; cmp says whether a comparison holds.
func arith(op string, a, b float64) float64 {
	switch op {
	case "+":
		return a + b
	case "-":
		return a - b
	case "*":
		return a * b
	case "/":
		return a / b
	}
	return math.Pow(a, b)
}

func cmp(op string, a, b float64) bool {
	switch op {
	case "==":
		return a == b
	case "!=":
		return a != b
	case ">":
		return a > b
	case "<":
		return a < b
	case ">=":
		return a >= b
	}
	return a <= b
}

func isComparison(op string) bool { return slices.Contains(levels()[1], op) }

// binop builds a binary operation with PromQL's matching rules.
func binop(op string, lhs, rhs node) node {
	return func(db []sample) (value, error) {
		a, err := lhs(db)
		if err != nil {
			return value{}, err
		}
		b, err := rhs(db)
		if err != nil {
			return value{}, err
		}
		switch {
		case op == "or":
			if a.scalar || b.scalar {
				return value{}, fmt.Errorf("or wants two vectors")
			}
			return orVec(a, b), nil
		case a.scalar && b.scalar:
			if isComparison(op) {
				return value{}, fmt.Errorf("comparison %s between scalars needs bool, unsupported", op)
			}
			return value{scalar: true, s: arith(op, a.s, b.s)}, nil
		case a.scalar || b.scalar:
			return scalarVec(op, a, b), nil
		}
		return vecVec(op, a, b)
	}
}

func orVec(a, b value) value {
	seen := map[string]bool{}
	out := value{vec: slices.Clone(a.vec)}
	for _, s := range a.vec {
		seen[signature(s.labels)] = true
	}
	for _, s := range b.vec {
		if !seen[signature(s.labels)] {
			out.vec = append(out.vec, s)
		}
	}
	return out
}

func scalarVec(op string, a, b value) value {
	out := value{}
	vec, vecLeft := b.vec, false
	if !a.scalar {
		vec, vecLeft = a.vec, true
	}
	for _, s := range vec {
		x, y := a.s, s.v
		if vecLeft {
			x, y = s.v, b.s
		}
		if isComparison(op) {
			if cmp(op, x, y) {
				out.vec = append(out.vec, s)
			}
			continue
		}
		out.vec = append(out.vec, sample{labels: withoutName(s.labels), v: arith(op, x, y)})
	}
	return out
}

func vecVec(op string, a, b value) (value, error) {
	right := map[string]sample{}
	for _, s := range b.vec {
		sig := signature(s.labels)
		if _, dup := right[sig]; dup {
			return value{}, fmt.Errorf("many-to-one match on %s is unsupported", sig)
		}
		right[sig] = s
	}
	out := value{}
	for _, s := range a.vec {
		r, ok := right[signature(s.labels)]
		if !ok {
			continue
		}
		if isComparison(op) {
			if cmp(op, s.v, r.v) {
				out.vec = append(out.vec, s)
			}
			continue
		}
		out.vec = append(out.vec, sample{labels: withoutName(s.labels), v: arith(op, s.v, r.v)})
	}
	return out, nil
}

// record evaluates a recording rule and returns its samples named record.
func record(name, expr string, db []sample) ([]sample, error) {
	n, err := parseExpr(expr)
	if err != nil {
		return nil, fmt.Errorf("rule %s: parse: %w", name, err)
	}
	v, err := n(db)
	if err != nil {
		return nil, fmt.Errorf("rule %s: %w", name, err)
	}
	if v.scalar {
		return nil, fmt.Errorf("rule %s: gives a scalar, want a vector", name)
	}
	out := make([]sample, len(v.vec))
	for i, s := range v.vec {
		ls := withoutName(s.labels)
		ls["__name__"] = name
		out[i] = sample{labels: ls, v: s.v}
	}
	return out, nil
}
