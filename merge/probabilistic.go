package merge

import (
	"fmt"
	"math"
)

// DefaultTau is probabilistic interleaving's published softmax exponent
// (Hofmann, Whiteson & de Rijke, CIKM 2011, section 4).
const DefaultTau = 3

// piExactSlots is the most clicked slots of uncertain team whose 2^k team
// assignments Probabilistic.Credit sums exactly; past it the sum of
// independent signed weights is taken as normal (central limit theorem).
// 2^20 terms take a few milliseconds, and a merged list with more than 20
// clicked slots is not something a recommendation widget sees.
const piExactSlots = 20

// Probabilistic is probabilistic interleaving (Hofmann, Whiteson & de Rijke,
// "A probabilistic method for inferring preferences from clicks", CIKM 2011;
// and "Fidelity, soundness, and efficiency of interleaved comparison
// methods", ACM TOIS 31(4), 2013). Each list becomes a softmax over its
// ranks: it draws item d with probability proportional to rank(d)^-Tau.
// Each slot picks a list by a fair coin, draws an item from it, removes the
// item from both lists' distributions and renormalises them.
//
// The zero value uses the published Tau of 3. A Probabilistic holds no
// mutable state and is safe for concurrent use.
type Probabilistic struct {
	// Tau is the softmax exponent; 0 means DefaultTau. Larger values put
	// more of each draw on the top remaining item.
	Tau float64
}

var _ Policy = Probabilistic{}

// NewProbabilistic returns the policy with softmax exponent tau (0 means
// DefaultTau). A negative, infinite or NaN tau is an error wrapping
// ErrBadOption.
func NewProbabilistic(tau float64) (Probabilistic, error) {
	if tau < 0 || math.IsInf(tau, 0) || math.IsNaN(tau) {
		return Probabilistic{}, fmt.Errorf("probabilistic: tau %v: %w (want a finite number >= 0; 0 means %d)",
			tau, ErrBadOption, DefaultTau)
	}
	return Probabilistic{Tau: tau}, nil
}

// Name returns "probabilistic".
func (Probabilistic) Name() string { return "probabilistic" }

// RankProbabilities returns the probability with which a list of n items
// draws each rank (index 0 is rank 1) under softmax exponent tau (0 means
// DefaultTau): P(r) = r^-tau / sum over s of s^-tau. It is the first draw of
// Probabilistic.Interleave.
func RankProbabilities(n int, tau float64) []float64 {
	if tau == 0 {
		tau = DefaultTau
	}
	p := make([]float64, max(n, 0))
	sum := 0.0
	for i := range p {
		p[i] = piWeight(i+1, tau)
		sum += p[i]
	}
	for i := range p {
		p[i] /= sum
	}
	return p
}

// piWeight is r^-tau, multiplied out for the small whole exponents that
// configurations use, since math.Pow costs as much as the rest of a draw.
func piWeight(r int, tau float64) float64 {
	x := float64(r)
	switch tau {
	case 1:
		return 1 / x
	case 2:
		return 1 / (x * x)
	case 3:
		return 1 / (x * x * x)
	case 4:
		return 1 / (x * x * x * x)
	}
	return math.Pow(x, -tau)
}

// Interleave merges a (incumbent) and b (challenger) into at most n slots by
// probabilistic interleaving, appending to dst[:0]. Each slot's Team is the
// list whose draw placed it, and PA and PB are the probabilities with which
// a's and b's distributions, as they stood at that slot, would have drawn
// the item (0 for a list that lacks it). When one list has nothing left to
// draw the other draws every remaining slot. An item repeated within one
// list counts at its first rank.
func (p Probabilistic) Interleave(dst []Slot, a, b []string, n int, seed uint64) []Slot {
	tau := p.Tau
	if tau == 0 {
		tau = DefaultTau
	}
	n = max(0, min(n, len(a)+len(b)))
	dst = resultSlice(dst, n)
	var ws workspace
	x := ws.ranks(a, b)
	xa, xb := x[:len(a)], x[len(a):]
	var wbuf [stackItems]float64
	w := wbuf[:0]
	for r := 1; r <= max(len(a), len(b)); r++ {
		w = append(w, piWeight(r, tau))
	}
	c := newCoins(seed)
	la, lb := newPIList(xa, w), newPIList(xb, w)
	for len(dst) < n {
		hasA, hasB := la.next(), lb.next()
		if !hasA && !hasB {
			break
		}
		sumA, sumB := la.sum, lb.sum
		var s Slot
		if hasA && (!hasB || c.flip()) {
			s = place(a, xa, xb, la.draw(w, &c), Incumbent)
		} else {
			s = placeB(b, xa, xb, lb.draw(w, &c))
		}
		if s.RankA > 0 {
			s.PA = float32(w[s.RankA-1] / sumA)
			la.remove(s.RankA, w)
		}
		if s.RankB > 0 {
			s.PB = float32(w[s.RankB-1] / sumB)
			lb.remove(s.RankB, w)
		}
		dst = append(dst, s)
	}
	return dst
}

// piList is one list's distribution during an interleaving: its cross-rank
// entries (placed items are taken) and the total weight of the rest.
type piList struct {
	x     []int32
	first int     // no unplaced item comes before it
	sum   float64 // weight of the unplaced items
	exact float64 // sum when last added up afresh
}

// newPIList returns the distribution of a list with cross ranks x.
func newPIList(x []int32, w []float64) piList {
	l := piList{x: x}
	l.resum(w)
	return l
}

// resum adds the unplaced weight up afresh.
func (l *piList) resum(w []float64) {
	l.sum = 0
	for i := l.first; i < len(l.x); i++ {
		if l.x[i] != taken {
			l.sum += w[i]
		}
	}
	l.exact = l.sum
}

// next skips placed items and reports whether any item is left.
func (l *piList) next() bool {
	for l.first < len(l.x) && l.x[l.first] == taken {
		l.first++
	}
	return l.first < len(l.x)
}

// remove takes the item at 1-based rank r out of the distribution (its
// entry is already taken). The running sum is added up afresh once it has
// shrunk a thousandfold, so rounding never builds up.
func (l *piList) remove(r int32, w []float64) {
	l.sum -= w[r-1]
	if l.sum < l.exact/1024 {
		l.resum(w)
	}
}

// draw returns the index of an unplaced item, drawn with probability
// w[i]/sum; next must have reported an item left.
func (l *piList) draw(w []float64, c *coins) int {
	u := float64(c.src.Uint64()>>11) * 0x1p-53 * l.sum
	last := l.first
	for i := l.first; i < len(l.x); i++ {
		if l.x[i] == taken {
			continue
		}
		last = i
		if u < w[i] {
			return i
		}
		u -= w[i]
	}
	return last // rounding left u just past the final weight
}

// Credit is probabilistic interleaving's marginalised credit (Hofmann,
// Whiteson & de Rijke, CIKM 2011, section 4.2). An assignment a says which
// list drew each slot; its outcome is the sign of the challenger team's
// click weight minus the incumbent team's. The credit is the outcome's
// expectation over every assignment that could have produced the shown
// list, weighted by P(a | list). Score.Challenger is the posterior
// probability that the challenger's team earned more and Score.Incumbent
// that the incumbent's did, so Challenger - Incumbent is the published
// expected outcome E[o], and Decide follows its sign.
//
// Only the logged PA and PB are needed. Every draw removes the item from
// both distributions, so the distributions at slot i depend on the items
// shown above it and not on which list drew them: P(list | a) is the
// product over slots of PA (a drew from the incumbent) or PB, and with the
// fair-coin prior the posterior factorises, slot i having come from the
// challenger with probability PB/(PA+PB) independently of the other slots.
// The 2^n assignments therefore collapse onto the clicked slots: unclicked
// slots, and all slots below the lowest click, sum out. Credit enumerates
// the 2^k assignments of the k clicked slots whose team is uncertain (a
// slot that only one list holds is certain), up to k = 20, and past that
// takes the signed sum as normal. A slot without probabilities (PA = PB =
// 0) counts for its Team; Fixed slots and clicks outside the list earn
// nothing.
//
// E[o] has expectation zero under random clicks, but its sign need not
// split evenly: counting wins and losses by the sign alone leans to one
// side on some pairs (for A = (a,b,c) and B = (b,c,a) a click on the first
// slot favours the challenger 55% of the time). Probabilistic.Decide
// therefore does not take the sign: see there.
func (Probabilistic) Credit(slots []Slot, clicks []Click) Score {
	var wbuf [64]float64
	w := wbuf[:]
	if len(slots) > len(w) {
		w = make([]float64, len(slots))
	}
	w = w[:len(slots)]
	total := 0.0
	for _, c := range clicks {
		if credited(slots, c.Pos) && c.Weight > 0 {
			w[c.Pos] += c.Weight
			total += c.Weight
		}
	}
	if total == 0 {
		return Score{}
	}
	var tbuf [piExactSlots]piTerm
	terms := tbuf[:0]
	sure := 0.0 // challenger minus incumbent weight over slots of certain team
	for i, wi := range w {
		if wi == 0 {
			continue
		}
		switch q := piPosterior(slots[i]); {
		case q <= 0:
			sure -= wi
		case q >= 1:
			sure += wi
		default:
			terms = append(terms, piTerm{w: wi, q: q})
		}
	}
	if len(terms) > piExactSlots {
		return piNormal(sure, terms)
	}
	var s Score
	piSum(terms, sure, 1, 1e-9*total, &s)
	return s
}

// piTerm is one clicked slot of uncertain team: its click weight and the
// posterior probability that the challenger drew it.
type piTerm struct{ w, q float64 }

// piPosterior is the probability that the challenger's list drew slot s,
// given the logged draw probabilities.
func piPosterior(s Slot) float64 {
	pa, pb := max(float64(s.PA), 0), max(float64(s.PB), 0)
	if pa+pb > 0 {
		return pb / (pa + pb)
	}
	if s.Team == Challenger {
		return 1
	}
	return 0
}

// piSum adds to s the probability mass p of every assignment of terms,
// given the signed weight d fixed so far, on the side the total favours;
// totals within eps of zero are ties and count for neither.
func piSum(terms []piTerm, d, p, eps float64, s *Score) {
	if len(terms) == 0 {
		switch {
		case d > eps:
			s.Challenger += p
		case d < -eps:
			s.Incumbent += p
		}
		return
	}
	t := terms[0]
	piSum(terms[1:], d+t.w, p*t.q, eps, s)
	piSum(terms[1:], d-t.w, p*(1-t.q), eps, s)
}

// piNormal approximates the posterior of the signed weight sure + sum of
// +-w (plus with probability q) by a normal with the same mean and variance.
func piNormal(sure float64, terms []piTerm) Score {
	mean, variance := sure, 0.0
	for _, t := range terms {
		mean += t.w * (2*t.q - 1)
		variance += 4 * t.w * t.w * t.q * (1 - t.q)
	}
	up := 0.5 * math.Erfc(-mean/math.Sqrt(2*variance))
	return Score{Incumbent: 1 - up, Challenger: up}
}

// Decide turns the marginalised credit into one impression's outcome by
// drawing a team assignment from its posterior P(a | list, clicks): the
// challenger wins with probability Score.Challenger, the incumbent with
// Score.Incumbent, else a tie. The posterior draw is distributed as the
// assignment that really produced the list, so win and loss counts have
// expectation sum(P(challenger)) and sum(P(incumbent)) exactly: their
// difference is the published expected outcome summed over impressions,
// zero under random clicks on every list pair, where the sign of E[o]
// alone is not. The draw comes from the impression's seed (mixed so it is
// independent of the interleaving's own draws), so the outcome can be
// re-derived for audit.
func (Probabilistic) Decide(s Score, hadEvents bool, seed uint64) Outcome {
	if !hadEvents {
		return NoFeedback
	}
	u := float64(splitmix(seed^0x6f7574636f6d65)>>11) / (1 << 53)
	switch {
	case u < s.Challenger:
		return ChallengerWin
	case u < s.Challenger+s.Incumbent:
		return IncumbentWin
	}
	return Tie
}

// splitmix is SplitMix64's output function (Steele, Lea & Flood, OOPSLA
// 2014): a well-mixed 64-bit value from a 64-bit input.
func splitmix(x uint64) uint64 {
	x += 0x9e3779b97f4a7c15
	x = (x ^ (x >> 30)) * 0xbf58476d1ce4e5b9
	x = (x ^ (x >> 27)) * 0x94d049bb133111eb
	return x ^ (x >> 31)
}

var _ Decider = Probabilistic{}
