package verdict

import (
	"fmt"

	"gonum.org/v1/gonum/stat/distuv"
)

// SignTest is the exact two-sided binomial sign test of the challenger's
// wins against its losses under p = 0.5, counted in the units Unit names.
// Status computes it on users (each user counts once, for the side that
// won more of their impressions), which keeps it valid when one user's
// impressions are alike; ties (users with as many wins as losses) carry
// no sign and are set aside. It is a fixed-sample test: its p-value is
// valid at one pre-planned look, not when watched live.
type SignTest struct {
	// PValue is the two-sided exact p-value.
	PValue float64 `json:"p_value"`
	// Challenger and Incumbent are the units each side won.
	Challenger int64 `json:"challenger"`
	Incumbent  int64 `json:"incumbent"`
	// TiesSetAside is the number of units left out of the test.
	TiesSetAside int64 `json:"ties_set_aside"`
	// Unit is what was counted: "users".
	Unit string `json:"unit"`
}

// SignTestPValue returns the exact two-sided p-value of the binomial sign
// test for wins successes against losses failures under p = 0.5:
// 2 P(X >= max(wins, losses)) for X ~ Binomial(wins+losses, 1/2), at most 1.
// With no trials it is 1.
func SignTestPValue(wins, losses int64) (float64, error) {
	if wins < 0 || losses < 0 {
		return 0, fmt.Errorf("%w: sign test: %d wins and %d losses: counts must be >= 0", ErrInput, wins, losses)
	}
	n := wins + losses
	k := max(wins, losses)
	if n == 0 || 2*k == n {
		return 1, nil
	}
	// P(X >= k) for X ~ Binomial(n, 1/2) is the regularised incomplete beta
	// I_{1/2}(k, n-k+1), i.e. the CDF at 1/2 of Beta(k, n-k+1)
	// (Abramowitz & Stegun 26.5.24).
	tail := distuv.Beta{Alpha: float64(k), Beta: float64(n - k + 1)}.CDF(0.5)
	return min(1, 2*tail), nil
}
