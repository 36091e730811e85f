package verdict

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mathext"
)

// Mixture is the Beta(A, B) mixing distribution of the mixture sequential
// probability ratio test for a Bernoulli share (Robbins 1970; Johari,
// Pekelis & Walsh 2017). The zero value is not usable; see MixtureForMDE.
type Mixture struct {
	// A and B are the Beta distribution's shape parameters, both > 0.
	A, B float64
}

// MixtureForMDE returns the symmetric Beta(a, a) mixture whose standard
// deviation, 1/(2 sqrt(2a+1)), equals mde, so the test is most sensitive to
// shares about mde away from 1/2. a is at least 1 (the uniform mixture),
// which is what mde of about 0.29 or more gives.
func MixtureForMDE(mde float64) Mixture {
	a := 1.0
	if mde > 0 {
		a = max(1, (1/(4*mde*mde)-1)/2)
	}
	return Mixture{A: a, B: a}
}

func (m Mixture) check(s, f float64) error {
	if !(m.A > 0 && m.B > 0) || math.IsInf(m.A+m.B, 0) {
		return fmt.Errorf("%w: mixture Beta(%v, %v): want finite positive parameters", ErrInput, m.A, m.B)
	}
	if !(s >= 0 && f >= 0) || math.IsInf(s+f, 0) {
		return fmt.Errorf("%w: mixture: %v successes and %v failures: want finite counts >= 0", ErrInput, s, f)
	}
	return nil
}

// logMarginal is log of the mixture's marginal likelihood of a sequence
// with s successes and f failures: log B(A+s, B+f) - log B(A, B).
func (m Mixture) logMarginal(s, f float64) float64 {
	return mathext.Lbeta(m.A+s, m.B+f) - mathext.Lbeta(m.A, m.B)
}

// LogLR returns the log of the mixture likelihood ratio against share p0
// after s successes and f failures:
//
//	log Lambda = log B(A+s, B+f) - log B(A, B) - s log p0 - f log(1-p0).
//
// Counts may be fractional (effective counts). 0 < p0 < 1.
func (m Mixture) LogLR(s, f, p0 float64) (float64, error) {
	if err := m.check(s, f); err != nil {
		return 0, err
	}
	if !(p0 > 0 && p0 < 1) {
		return 0, fmt.Errorf("%w: mixture: null share %v: want a value in (0, 1)", ErrInput, p0)
	}
	return m.logMarginal(s, f) - s*math.Log(p0) - f*math.Log1p(-p0), nil
}

// PValue returns the always-valid p-value min(1, 1/Lambda) of the mixture
// test of share 1/2 after s successes and f failures.
func (m Mixture) PValue(s, f float64) (float64, error) {
	l, err := m.LogLR(s, f, 0.5)
	if err != nil {
		return 0, err
	}
	return math.Min(1, math.Exp(-l)), nil
}

// ConfidenceSequence returns the set of shares p0 whose mixture likelihood
// ratio after s successes and f failures is below 1/alpha. Over all sample
// sizes at once it covers the true share with probability at least
// 1 - alpha (Ville's inequality). It is an interval containing s/(s+f),
// because the log ratio is convex in p0; its ends are found by bisection.
func (m Mixture) ConfidenceSequence(s, f, alpha float64) (Interval, error) {
	if err := checkAlpha(alpha); err != nil {
		return Interval{}, err
	}
	if err := m.check(s, f); err != nil {
		return Interval{}, err
	}
	bound := m.logMarginal(s, f) - math.Log(1/alpha)
	// inside reports whether p0 is in the sequence: s log p0 + f log(1-p0)
	// > bound. At 0 and 1 the terms with zero counts vanish.
	inside := func(p0 float64) bool {
		ll := 0.0
		if s > 0 {
			ll += s * math.Log(p0)
		}
		if f > 0 {
			ll += f * math.Log1p(-p0)
		}
		return ll > bound
	}
	mid := 0.5
	if s+f > 0 {
		mid = s / (s + f)
	}
	return Interval{edge(inside, mid, 0), edge(inside, mid, 1)}, nil
}

// edge finds, between in (inside) and out, the boundary of the convex set
// described by inside; it returns out itself when out is inside.
func edge(inside func(float64) bool, in, out float64) float64 {
	if inside(out) {
		return out
	}
	for range 200 {
		mid := (in + out) / 2
		if mid == in || mid == out {
			break
		}
		if inside(mid) {
			in = mid
		} else {
			out = mid
		}
	}
	return in
}

// sequence is the mixture test updated one observation at a time, as a
// live dashboard sees it; logLR equals Mixture.LogLR(s, f, 1/2).
type sequence struct {
	m     Mixture
	s, f  float64
	logLR float64
	log2  float64
}

func newSequence(m Mixture) *sequence { return &sequence{m: m, log2: math.Ln2} }

// add folds in one observation: the ratio's factor is the mixture's
// predictive probability of it over 1/2.
func (q *sequence) add(success bool) {
	n := q.s + q.f
	if success {
		q.logLR += math.Log((q.m.A+q.s)/(q.m.A+q.m.B+n)) + q.log2
		q.s++
	} else {
		q.logLR += math.Log((q.m.B+q.f)/(q.m.A+q.m.B+n)) + q.log2
		q.f++
	}
}
