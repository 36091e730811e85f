package verdict

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// Interval is a closed interval [Lo, Hi]; it marshals to JSON as [lo, hi].
type Interval [2]float64

// Lo returns the interval's lower end.
func (iv Interval) Lo() float64 { return iv[0] }

// Hi returns the interval's upper end.
func (iv Interval) Hi() float64 { return iv[1] }

// Contains reports whether x lies in the interval.
func (iv Interval) Contains(x float64) bool { return iv[0] <= x && x <= iv[1] }

// zTwoSided returns the standard normal quantile z with P(|Z| > z) = alpha.
func zTwoSided(alpha float64) float64 {
	return distuv.UnitNormal.Quantile(1 - alpha/2)
}

// checkAlpha returns an error wrapping ErrInput unless 0 < alpha < 1.
func checkAlpha(alpha float64) error {
	if !(alpha > 0 && alpha < 1) {
		return fmt.Errorf("%w: alpha %v: want a value in (0, 1)", ErrInput, alpha)
	}
	return nil
}

// Wilson returns the Wilson score interval (Wilson, JASA 22, 1927; method 3
// of Newcombe, Statistics in Medicine 17, 1998) at confidence 1 - alpha for
// a proportion with x successes in n trials. Counts may be fractional (for
// effective counts under clustering). With n = 0 it returns [0, 1].
func Wilson(x, n, alpha float64) (Interval, error) {
	if err := checkAlpha(alpha); err != nil {
		return Interval{}, err
	}
	if !(x >= 0 && n >= x) || math.IsInf(n, 0) {
		return Interval{}, fmt.Errorf("%w: wilson: %v successes of %v trials: want 0 <= x <= n < inf", ErrInput, x, n)
	}
	if n == 0 {
		return Interval{0, 1}, nil
	}
	z := zTwoSided(alpha)
	z2 := z * z
	center := (x + z2/2) / (n + z2)
	half := z * math.Sqrt(x*(n-x)/n+z2/4) / (n + z2)
	return Interval{clamp(center-half, 0, 1), clamp(center+half, 0, 1)}, nil
}

// preferenceInterval is the score interval for the preference share
// R = (W + T/2)/n at critical value z, from w wins, l losses and t ties:
// the set of r with
//
//	(|R - r| - 1/(4n))^2 <= z^2 deff (r (1-r) - tau(r)/4) / n,
//
// where r(1-r) - tau/4 is the variance of one impression's score (1 win,
// 1/2 tie, 0 loss) under share r and tie share tau, and tau(r) is the
// tie share's maximum-likelihood estimate under the constraint R = r
// (the restricted estimate of a score test, as in Miettinen & Nurminen,
// Statistics in Medicine 4, 1985), not the observed tie share: with all
// ties observed, the observed share would make the variance 0 and the
// interval the point 1/2. The 1/(4n) is a continuity correction of half
// the step of R's lattice (Yates-style, as in Newcombe 1998 method 4),
// which keeps the coverage at or above 1 - alpha - 0.02 for n >= 10 (see
// TestPreferenceIntervalCoverage). Without ties, clustering or the
// correction it is Wilson's interval.
func preferenceInterval(w, l, t, deff, z float64) Interval {
	n := w + l + t
	if n <= 0 {
		return Interval{0, 1}
	}
	est := (w + t/2) / n
	c := z * z * deff / n
	inside := func(r float64) bool {
		d := max(0, math.Abs(est-r)-1/(4*n))
		return d*d <= c*(r*(1-r)-tieShareUnder(w, l, t, r)/4)
	}
	return Interval{edge(inside, est, 0), edge(inside, est, 1)}
}

// tieShareUnder returns the maximum-likelihood tie share of w wins, l
// losses and t ties among trinomial shares with preference share r:
// the tau in [0, 2 min(r, 1-r)] maximising
// w log(r - tau/2) + t log tau + l log(1 - r - tau/2), whose derivative
// falls in tau, so its zero is found by bisection.
func tieShareUnder(w, l, t, r float64) float64 {
	most := 2 * min(r, 1-r)
	switch {
	case t == 0 || most <= 0:
		return 0
	case w == 0 && l == 0:
		return most
	}
	slope := func(tau float64) float64 {
		return t/tau - w/(2*r-tau) - l/(2*(1-r)-tau)
	}
	lo, hi := 0.0, most
	for range 100 {
		mid := (lo + hi) / 2
		if mid == lo || mid == hi {
			break
		}
		if slope(mid) > 0 {
			lo = mid
		} else {
			hi = mid
		}
	}
	return (lo + hi) / 2
}

func clamp(x, lo, hi float64) float64 {
	return math.Min(hi, math.Max(lo, x))
}
