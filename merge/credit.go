package merge

import "math"

// DebiasWeight is the inverse-propensity weight 1/p(rank) of an event at
// 1-based position rank, under the position-bias model p(rank) = (1/rank)^eta
// (Joachims, Swaminathan & Schnabel, "Unbiased learning-to-rank with biased
// feedback", WSDM 2017, section 5): a click low in the list, which users
// examine less often, counts for more. eta 0 gives 1 at every rank. A rank
// below 1, or an eta that is negative or not finite, gives 1 (no debiasing).
func DebiasWeight(rank int, eta float64) float64 {
	if rank < 1 || !(eta > 0) || math.IsInf(eta, 1) {
		return 1
	}
	// 1 / (1/rank)^eta = rank^eta.
	return math.Pow(float64(rank), eta)
}

// Debias multiplies each click's weight by DebiasWeight of its position
// (Pos+1) in place and returns clicks. eta 0 leaves the weights unchanged.
func Debias(clicks []Click, eta float64) []Click {
	for i := range clicks {
		clicks[i].Weight *= DebiasWeight(clicks[i].Pos+1, eta)
	}
	return clicks
}
