package deploy

import (
	"fmt"
	"strconv"
	"strings"
	"time"
)

// point is one sample of an input series; ok is false for a missing one.
type point struct {
	v  float64
	ok bool
}

// parseSeries parses a series in promtool's input notation,
// `name{label="value", ...}`, into its labels (with __name__).
func parseSeries(s string) (map[string]string, error) {
	toks, err := lex(s)
	if err != nil {
		return nil, fmt.Errorf("series %q: %w", s, err)
	}
	if len(toks) == 0 || toks[0].kind != "ident" {
		return nil, fmt.Errorf("series %q: want a metric name first", s)
	}
	ls := map[string]string{"__name__": toks[0].text}
	rest := toks[1:]
	if len(rest) == 0 {
		return ls, nil
	}
	if rest[0].kind != "{" || rest[len(rest)-1].kind != "}" {
		return nil, fmt.Errorf("series %q: want {labels} after the name", s)
	}
	rest = rest[1 : len(rest)-1]
	for len(rest) > 0 {
		if len(rest) < 3 || rest[0].kind != "ident" || rest[1].kind != "=" || rest[2].kind != "str" {
			return nil, fmt.Errorf("series %q: want label=\"value\"", s)
		}
		v, err := strconv.Unquote(rest[2].text)
		if err != nil {
			return nil, fmt.Errorf("series %q: label %s: %w", s, rest[0].text, err)
		}
		ls[rest[0].text] = v
		rest = rest[3:]
		if len(rest) > 0 && rest[0].kind == "," {
			rest = rest[1:]
		}
	}
	return ls, nil
}

// parseValues expands promtool's values notation, as its documentation for
// unit-testing rules describes it: numbers; `_` for a missing sample;
// `a+bxn` and `a-bxn` for a followed by n samples stepping by b; `axn` for
// a+0xn; `_xn` for n missing samples.
func parseValues(s string) ([]point, error) {
	var out []point
	for _, f := range strings.Fields(s) {
		base, count, repeat := strings.Cut(f, "x")
		n := 0
		if repeat {
			var err error
			if n, err = strconv.Atoi(count); err != nil || n < 0 || n > 10_000 {
				return nil, fmt.Errorf("values %q: bad repeat count in %q", s, f)
			}
		}
		if base == "_" {
			if !repeat {
				n = 1
			}
			out = append(out, make([]point, n)...)
			continue
		}
		start, step, err := splitStep(base)
		if err != nil {
			return nil, fmt.Errorf("values %q: %q: %w", s, f, err)
		}
		if !repeat {
			out = append(out, point{v: start, ok: true})
			continue
		}
		for i := 0; i <= n; i++ {
			out = append(out, point{v: start + float64(i)*step, ok: true})
		}
	}
	return out, nil
}

// splitStep splits "a+b" or "a-b" (a may carry its own sign) into a and
// the signed step; a plain number has step 0.
func splitStep(s string) (float64, float64, error) {
	for i := 1; i < len(s); i++ {
		if (s[i] == '+' || s[i] == '-') && s[i-1] != 'e' && s[i-1] != 'E' {
			a, err := strconv.ParseFloat(s[:i], 64)
			if err != nil {
				return 0, 0, err
			}
			b, err := strconv.ParseFloat(s[i+1:], 64)
			if err != nil {
				return 0, 0, err
			}
			if s[i] == '-' {
				b = -b
			}
			return a, b, nil
		}
	}
	a, err := strconv.ParseFloat(s, 64)
	return a, 0, err
}

// lookback is how far back an instant selector looks for a sample
// (Prometheus's default of five minutes).
const lookback = 5 * time.Minute

// at returns the series' value at t, sampled every interval from 0: the
// latest sample at or before t within the lookback.
func at(ps []point, interval, t time.Duration) (float64, bool) {
	i := int(t / interval)
	for j := min(i, len(ps)-1); j >= 0 && time.Duration(i-j)*interval <= lookback; j-- {
		if ps[j].ok {
			return ps[j].v, true
		}
	}
	return 0, false
}
