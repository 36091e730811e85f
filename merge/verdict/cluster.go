package verdict

import (
	"cmp"
	"fmt"

	"riffle/merge"
)

// moments are the sums over clusters (users) behind the delta-method
// variance of the preference share R = sum(y)/sum(n), with y = W + T/2
// kept doubled (w2 = 2y) so that every sum is of integers. Sums of
// integer-valued float64 are exact below 2^53, hence independent of the
// order users are visited in.
type moments struct {
	k  float64 // clusters
	n  float64 // sum of n_u
	y2 float64 // sum of 2 y_u
	aa float64 // sum of (2 y_u)^2
	an float64 // sum of 2 y_u n_u
	nn float64 // sum of n_u^2
}

// addCluster adds one user with w wins, l losses and t ties; a user with
// no impression with feedback adds nothing.
func (m *moments) addCluster(w, l, t int64) {
	n := float64(w + l + t)
	if n == 0 {
		return
	}
	y2 := float64(2*w + t)
	m.k++
	m.n += n
	m.y2 += y2
	m.aa += y2 * y2
	m.an += y2 * n
	m.nn += n * n
}

// addSingletons adds w wins, l losses and t ties as clusters of one
// impression each.
func (m *moments) addSingletons(w, l, t int64) {
	m.k += float64(w + l + t)
	m.n += float64(w + l + t)
	m.y2 += float64(2*w + t)
	m.aa += float64(4*w + t)
	m.an += float64(2*w + t)
	m.nn += float64(w + l + t)
}

// variance returns the cluster-robust (sandwich) variance of R,
//
//	k/(k-1) * sum_u (y_u - R n_u)^2 / (sum_u n_u)^2,
//
// the linearisation (delta method) of the ratio estimator, Cochran (1977)
// section 6.3 with the usual k/(k-1) small-sample factor. Zero with fewer
// than two clusters.
func (m moments) variance() float64 {
	if m.k < 2 || m.n == 0 {
		return 0
	}
	r2 := m.y2 / m.n // 2R
	ss := (m.aa - 2*r2*m.an + r2*r2*m.nn) / 4
	if ss < 0 {
		ss = 0 // rounding: the sum of squares is >= 0
	}
	return m.k / (m.k - 1) * ss / (m.n * m.n)
}

// clustering holds the variance of the preference share clustered by user
// and as if impressions were independent, the sums behind both, the same
// sums with ties set aside (for the win share), and the users each side
// won more impressions of.
type clustering struct {
	users     int64
	clustered float64
	naive     float64

	byUser, single     moments
	decisive, decided1 moments // ties set aside: by user, and per impression
	// signs counts users by who won more of their impressions: index 0
	// the incumbent, 1 neither (even), 2 the challenger.
	signs [3]int64
}

// designEffect is clustered over naive variance; 1 when the naive
// variance is zero (all outcomes alike), since nothing is then inflated.
// Where the clustered variance cannot be estimated (fewer than two users,
// or every user with the same share, which with few users is chance
// rather than evidence of independence) it is the largest a design
// effect can be, sum n_u^2 / sum n_u, as if every user's impressions
// were copies of one; so it is never 0.
func (c clustering) designEffect() float64 {
	if c.naive <= 0 {
		return 1
	}
	if c.byUser.k < 2 || c.clustered <= 0 {
		return max(1, c.byUser.nn/c.byUser.n)
	}
	return c.clustered / c.naive
}

// cluster computes the variances of R from the totals and the per-user
// counts. Impressions of user key 0 (requests without a user key) and any
// impressions the per-user counts do not account for are treated as users
// of one impression each. Per-user counts that are negative or add up to
// more than the totals are an error wrapping ErrInput.
func cluster(total [4]int64, users map[uint64][4]int64) (clustering, error) {
	var c clustering
	var seen [4]int64
	for u, o := range users {
		if u == 0 {
			continue
		}
		uw, ul, ut := o[merge.ChallengerWin], o[merge.IncumbentWin], o[merge.Tie]
		if uw < 0 || ul < 0 || ut < 0 {
			return c, fmt.Errorf("%w: user %016x has negative counts %v", ErrInput, u, o)
		}
		if uw+ul+ut > 0 {
			c.users++
			c.signs[cmp.Compare(uw, ul)+1]++
		}
		c.byUser.addCluster(uw, ul, ut)
		c.decisive.addCluster(uw, ul, 0)
		seen[merge.ChallengerWin] += uw
		seen[merge.IncumbentWin] += ul
		seen[merge.Tie] += ut
	}
	for _, o := range []merge.Outcome{merge.IncumbentWin, merge.ChallengerWin, merge.Tie} {
		if seen[o] > total[o] {
			return c, fmt.Errorf("%w: per-user %s counts add up to %d, more than the total %d", ErrInput, o, seen[o], total[o])
		}
	}
	rest := func(o merge.Outcome) int64 { return total[o] - seen[o] }
	rw, rl, rt := rest(merge.ChallengerWin), rest(merge.IncumbentWin), rest(merge.Tie)
	c.users += rw + rl + rt
	c.signs[2] += rw
	c.signs[0] += rl
	c.signs[1] += rt
	c.byUser.addSingletons(rw, rl, rt)
	c.decisive.addSingletons(rw, rl, 0)
	w, l, t := total[merge.ChallengerWin], total[merge.IncumbentWin], total[merge.Tie]
	c.single.addSingletons(w, l, t)
	c.decided1.addSingletons(w, l, 0)
	c.clustered = c.byUser.variance()
	c.naive = c.single.variance()
	return c, nil
}
