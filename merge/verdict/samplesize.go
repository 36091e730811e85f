package verdict

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// checkPlan validates the planning parameters shared by the sample-size
// functions.
func checkPlan(alpha, power, mde float64) error {
	if err := checkAlpha(alpha); err != nil {
		return err
	}
	if !(power > 0 && power < 1) {
		return fmt.Errorf("%w: power %v: want a value in (0, 1)", ErrInput, power)
	}
	if !(mde > 0 && mde < 0.5) {
		return fmt.Errorf("%w: mde %v: want a Delta in (0, 0.5)", ErrInput, mde)
	}
	return nil
}

// SampleSize returns the number of impressions with feedback a two-sided
// fixed-sample test at level alpha needs to detect Delta = mde with the given
// power, by the classical one-sample proportion formula for p0 = 1/2 against
// p1 = 1/2 + mde:
//
//	n = ( z(1-alpha/2) sqrt(p0 (1-p0)) + z(power) sqrt(p1 (1-p1)) )^2 / mde^2
//
// rounded up. It assumes no ties; ties lower the variance, so with ties the
// number is conservative.
func SampleSize(alpha, power, mde float64) (int64, error) {
	if err := checkPlan(alpha, power, mde); err != nil {
		return 0, err
	}
	p1 := 0.5 + mde
	za := zTwoSided(alpha)
	zb := distuv.UnitNormal.Quantile(power)
	root := za*0.5 + zb*math.Sqrt(p1*(1-p1))
	return CeilCount(root * root / (mde * mde)), nil
}

// SequentialSampleSize returns the approximate number of impressions with
// feedback after which the always-valid test (the normal mixture riffle
// tunes for mde, at level alpha) has rejected Delta = 0 with the given
// power when the true Delta is mde. It is the smallest n at which the test
// rejects when the challenger's wins are at the (1 - power) quantile of
// their normal approximation under p1 = 1/2 + mde,
//
//	W = n p1 - z(power) sqrt(n p1 (1-p1)),
//
// so that the test rejects at n itself with probability about power; since
// it may have rejected earlier, the power by then is at least that. It
// assumes no ties and independent impressions, so that the sum is
// W - n/2 and its variance process n/4.
func SequentialSampleSize(alpha, power, mde float64) (int64, error) {
	if err := checkPlan(alpha, power, mde); err != nil {
		return 0, err
	}
	m, err := planMixture(alpha, power, mde)
	if err != nil {
		return 0, err
	}
	p1 := 0.5 + mde
	zb := distuv.UnitNormal.Quantile(power)
	threshold := math.Log(1 / alpha)
	rejects := func(n float64) bool {
		w := n*p1 - zb*math.Sqrt(n*p1*(1-p1))
		return w > n/2 && m.logE(w-n/2, n/4) >= threshold
	}
	hi := 1.0
	for !rejects(hi) {
		if hi > 1e15 {
			return 0, fmt.Errorf("%w: sequential sample size for mde %v: beyond 1e15", ErrInput, mde)
		}
		hi *= 2
	}
	lo := hi / 2
	for hi-lo > 0.5 {
		mid := (lo + hi) / 2
		if rejects(mid) {
			hi = mid
		} else {
			lo = mid
		}
	}
	return CeilCount(hi), nil
}

// CeilCount rounds a count up, forgiving float noise just above an
// integer (so 399/0.57 = 700.0000000001 gives 700, not 701).
func CeilCount(x float64) int64 {
	return int64(math.Ceil(x - 1e-9))
}
