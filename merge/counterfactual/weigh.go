package counterfactual

import (
	"errors"
	"fmt"
	"math"

	"riffle/merge"
)

// Errors Weigh returns for an impression it cannot weigh; each says why the
// impression is set aside.
var (
	// ErrHedged marks an impression with hedge-placed (Fixed) slots: the
	// hedge, not the policy, chose them, so the list has no probability
	// under probabilistic interleaving alone.
	ErrHedged = errors.New("counterfactual: the list has hedge-placed slots")
	// ErrNoProbabilities marks a slot without logged draw probabilities:
	// the impression was not served by probabilistic interleaving.
	ErrNoProbabilities = errors.New("counterfactual: a slot has no logged draw probabilities")
	// ErrNoLengths marks an impression whose source list lengths were not
	// logged, without which the source probability is unknown.
	ErrNoLengths = errors.New("counterfactual: the source lists' lengths were not logged")
)

// Logged is one impression logged under probabilistic interleaving of an
// incumbent (A) and a challenger (B).
type Logged struct {
	// Slots is the list shown, with each slot's ranks and the logged draw
	// probabilities PA and PB.
	Slots []merge.Slot
	// Lengths are the numbers of distinct items in A's and B's lists.
	Lengths [2]int
	// Clicks are the impression's weighted clicks, by position.
	Clicks []merge.Click
}

// Term is one impression's contribution to the estimate.
type Term struct {
	// Weight is P_T(l) / P_S(l); 0 when the target comparison could not
	// have shown the list (no overlap).
	Weight float64
	// Outcome is E_T[o | l, c], in [-1, 1]: the probability that the
	// candidate's team earned more click weight under the target, minus
	// the probability that the other side's did. 0 without clicks or
	// without overlap.
	Outcome float64
	// Clicked says whether any click was credited.
	Clicked bool
	// User is the hashed user key, for clustering; 0 means none.
	User uint64
}

// Weigh returns the impression's term for the target comparison of the
// logged side against (merge.Incumbent for A, merge.Challenger for B) with
// the candidate ranking, under probabilistic interleaving with softmax
// exponent tau (0 means merge.DefaultTau). The candidate takes the
// challenger's role, so a positive Outcome favours it.
func Weigh(l *Logged, against merge.Team, candidate []string, tau float64) (Term, error) {
	if against != merge.Incumbent && against != merge.Challenger {
		return Term{}, fmt.Errorf("counterfactual: against %v: want the incumbent or the challenger", against)
	}
	if l.Lengths[0] <= 0 || l.Lengths[1] <= 0 {
		return Term{}, ErrNoLengths
	}
	for i, s := range l.Slots {
		switch {
		case s.Team == merge.Fixed:
			return Term{}, fmt.Errorf("slot %d: %w", i+1, ErrHedged)
		case !(s.PA > 0 || s.PB > 0):
			return Term{}, fmt.Errorf("slot %d: %w", i+1, ErrNoProbabilities)
		}
	}
	target, w, err := targetSlots(l, against, candidate, tau)
	if err != nil || w == 0 {
		return Term{}, err
	}
	t := Term{Weight: w}
	for _, c := range l.Clicks {
		if c.Pos >= 0 && c.Pos < len(l.Slots) && c.Weight > 0 {
			t.Clicked = true
		}
	}
	s := merge.Probabilistic{Tau: tau}.Credit(target, l.Clicks)
	t.Outcome = s.Challenger - s.Incumbent
	return t, nil
}

// targetSlots returns the logged list as the target comparison would have
// drawn it (PA the kept side's draw probability, PB the candidate's) and
// the importance weight P_T(l) / P_S(l), taken slot by slot so that long
// lists do not underflow. A weight of 0 means the target could not have
// shown the list.
func targetSlots(l *Logged, against merge.Team, candidate []string, tau float64) ([]merge.Slot, float64, error) {
	cand := newSoftmax(candidate, tau)
	out := make([]merge.Slot, len(l.Slots))
	placed := [2]int{} // A's and B's items placed so far
	w := 1.0
	for i, s := range l.Slots {
		hasA, hasB := placed[0] < l.Lengths[0], placed[1] < l.Lengths[1]
		src := drawProb(float64(s.PA), float64(s.PB), hasA, hasB)
		if src <= 0 {
			return nil, 0, fmt.Errorf("slot %d: %w (the logged list could not have been drawn: p_incumbent %v, p_challenger %v)",
				i+1, ErrNoProbabilities, s.PA, s.PB)
		}
		px, hasX := float64(s.PA), hasA
		if against == merge.Challenger {
			px, hasX = float64(s.PB), hasB
		}
		hasC := cand.left > 0
		pc := cand.draw(s.Item)
		tgt := drawProb(px, pc, hasX, hasC)
		w *= tgt / src
		team := merge.Incumbent
		if pc > px {
			team = merge.Challenger
		}
		out[i] = merge.Slot{Item: s.Item, Team: team, PA: float32(px), PB: float32(pc)}
		if s.RankA > 0 {
			placed[0]++
		}
		if s.RankB > 0 {
			placed[1]++
		}
	}
	if w == 0 || math.IsNaN(w) {
		return nil, 0, nil
	}
	return out, w, nil
}

// drawProb is the probability that one slot of probabilistic interleaving
// draws an item that the two rankings would draw with probabilities p1 and
// p2: a fair coin picks the ranking while both have items left, else the
// one with items left draws.
func drawProb(p1, p2 float64, has1, has2 bool) float64 {
	switch {
	case has1 && has2:
		return (p1 + p2) / 2
	case has1:
		return p1
	case has2:
		return p2
	}
	return 0
}

// softmax is one ranking's draw distribution during an interleaving, as
// merge.Probabilistic keeps it: item at 1-based rank r has weight r^-tau,
// a repeat counts at its first rank, and placed items leave it.
type softmax struct {
	weight map[string]float64 // unplaced items
	sum    float64
	left   int
}

func newSoftmax(list []string, tau float64) *softmax {
	if tau == 0 {
		tau = merge.DefaultTau
	}
	s := &softmax{weight: make(map[string]float64, len(list))}
	for i, it := range list {
		if _, dup := s.weight[it]; dup {
			continue
		}
		w := math.Pow(float64(i+1), -tau)
		s.weight[it] = w
		s.sum += w
		s.left++
	}
	return s
}

// draw returns the probability that the distribution draws item now
// (0 when it lacks it) and removes the item.
func (s *softmax) draw(item string) float64 {
	w, ok := s.weight[item]
	if !ok {
		return 0
	}
	p := w / s.sum
	delete(s.weight, item)
	s.left--
	if s.left == 0 {
		s.sum = 0
	} else {
		s.sum -= w
	}
	return p
}
