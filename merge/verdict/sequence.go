package verdict

import (
	"cmp"
	"math"
	"slices"
)

// normalMixture is the two-sided normal-mixture boundary of Robbins
// (1970) in the form of Howard, Ramdas, McAuliffe & Sekhon
// ("Time-uniform, nonparametric, nonasymptotic confidence sequences",
// Annals of Statistics 49(2), 2021, section 3.2): for a sum S with
// variance process V, the mixture over lambda ~ N(0, rho2) of
// exp(lambda S - lambda^2 V / 2) is
//
//	E = exp(rho2 S^2 / (2 (1 + rho2 V))) / sqrt(1 + rho2 V),
//
// and by Ville's inequality it ever reaches 1/alpha with probability at
// most alpha when exp(lambda S - lambda^2 V / 2) is a supermartingale for
// every lambda. Howard et al.'s rho is 1/rho2 here.
type normalMixture struct {
	rho2 float64
}

// normalMixtureFor returns the mixture whose boundary is tightest when V
// reaches v (Howard et al. 2021, section 3.5: rho = v / (2 log(1/alpha) +
// log(1 + 2 log(1/alpha))) in their parameterisation).
func normalMixtureFor(alpha, v float64) normalMixture {
	l := 2 * math.Log(1/alpha)
	return normalMixture{rho2: (l + math.Log1p(l)) / v}
}

// planMixture is the mixture riffle uses for a plan: tightest at the
// variance of the impressions a fixed-sample test needs to detect mde at
// the given power (a quarter per impression without ties).
func planMixture(alpha, power, mde float64) (normalMixture, error) {
	n, err := SampleSize(alpha, power, mde)
	if err != nil {
		return normalMixture{}, err
	}
	return normalMixtureFor(alpha, float64(n)/4), nil
}

// logE returns log E for a sum s with variance process v >= 0.
func (m normalMixture) logE(s, v float64) float64 {
	u := m.rho2 * v
	return m.rho2*s*s/(2*(1+u)) - math.Log1p(u)/2
}

// look is the always-valid evidence about the preference share R at
// one look: the per-user sums, and the same sums as if every impression
// were a user of its own.
type look struct {
	mix           normalMixture
	byUser, naive moments
}

// logE returns the log of the mixture martingale for the hypothesis
// R = r. Its sum is S(r) = sum_u (y_u - r n_u), its variance process the
// self-normalising V(r) = sum_u (y_u - r n_u)^2 (de la Peña 1999: for
// conditionally symmetric increments exp(lambda S - lambda^2 V/2) is a
// supermartingale), over users, or over impressions if that is larger,
// so clustering never makes it narrower than for independent
// impressions. A larger V lowers E, which stays below the supermartingale
// that Ville's inequality bounds.
func (e *look) logE(r float64) float64 {
	s := (e.byUser.y2 - 2*r*e.byUser.n) / 2
	v := max(e.byUser.selfVariance(r), e.naive.selfVariance(r))
	return e.mix.logE(s, v)
}

// selfVariance is sum_u (y_u - r n_u)^2 from the moments (y kept doubled).
func (m moments) selfVariance(r float64) float64 {
	v := (m.aa - 4*r*m.an + 4*r*r*m.nn) / 4
	return max(0, v) // rounding only: a sum of squares is >= 0
}

// csGrid is how many points each side of the estimate is scanned at for
// the outermost share still in the sequence.
const csGrid = 64

// share returns the estimate of R; 1/2 with no impression.
func (e *look) share() float64 {
	if e.byUser.n == 0 {
		return 0.5
	}
	return e.byUser.y2 / (2 * e.byUser.n)
}

// interval returns the confidence sequence for R at level alpha at this
// look: the smallest interval holding every r in [0, 1] with
// E(r) < 1/alpha. The set need not be an interval (with few users E can
// fall again far from the estimate), so each side is scanned from the
// domain's end inward on a grid that includes 1/2, and the first point
// inside is refined by bisection; taking the hull only widens it.
func (e *look) interval(alpha float64) Interval {
	if e.byUser.n == 0 {
		return Interval{0, 1}
	}
	c := math.Log(1 / alpha)
	r := e.share()
	return Interval{e.end(r, 0, c), e.end(r, 1, c)}
}

// end returns the outermost r between the estimate and the domain end
// whose log E is below c.
func (e *look) end(est, domain, c float64) float64 {
	inside := func(x float64) bool { return e.logE(x) < c }
	out := domain
	for i, g := range gridToward(est, domain) {
		if inside(g) {
			if i == 0 {
				return g
			}
			return edge(inside, g, out)
		}
		out = g
	}
	return edge(inside, est, out)
}

// gridToward returns csGrid points from domain toward est (est itself
// excluded), in that order, with 1/2 among them when it lies between
// domain (included) and est.
func gridToward(est, domain float64) []float64 {
	pts := make([]float64, 0, csGrid+1)
	for j := range csGrid {
		pts = append(pts, domain+(est-domain)*float64(j)/csGrid)
	}
	between := (0.5-domain)*(0.5-est) < 0 || domain == 0.5
	if between && !slices.Contains(pts, 0.5) {
		far := math.Abs(0.5 - domain)
		i, _ := slices.BinarySearchFunc(pts, far, func(g, t float64) int {
			return cmp.Compare(math.Abs(g-domain), t)
		})
		pts = slices.Insert(pts, i, 0.5)
	}
	return pts
}

// pValue returns the smallest alpha at which interval excludes 1/2: the
// least E over the grid points from 1/2 out to the domain's end on the
// side away from the estimate, inverted.
func (e *look) pValue() float64 {
	r := e.share()
	if e.byUser.n == 0 || r == 0.5 {
		return 1
	}
	domain := 0.0
	if r < 0.5 {
		domain = 1
	}
	least := math.Inf(1)
	for _, g := range gridToward(r, domain) {
		if (g-0.5)*(domain-0.5) >= 0 {
			least = min(least, e.logE(g))
		}
	}
	return min(1, math.Exp(-least))
}
