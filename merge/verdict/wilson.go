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

// preferenceInterval is the Wilson-type score interval for the preference
// share R = (W + T/2)/n at critical value z: the set of r with
// (R - r)^2 <= c (r(1-r) - t/4), c = z^2 deff / n, where t is the observed
// tie share and r(1-r) - t/4 the variance of one impression's score (1 win,
// 1/2 tie, 0 loss) under share r with ties at share t. With t = 0 and
// deff = 1 it is Wilson's interval.
func preferenceInterval(r, t, n, deff, z float64) Interval {
	if n <= 0 {
		return Interval{0, 1}
	}
	c := z * z * deff / n
	disc := c * (4*r*(1-r) - t + c*(1-t))
	if disc < 0 {
		disc = 0 // rounding only: the observed counts make it >= 0
	}
	root := math.Sqrt(disc)
	den := 2 * (1 + c)
	return Interval{clamp((2*r+c-root)/den, 0, 1), clamp((2*r+c+root)/den, 0, 1)}
}

func clamp(x, lo, hi float64) float64 {
	return math.Min(hi, math.Max(lo, x))
}
