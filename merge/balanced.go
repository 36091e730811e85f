package merge

// Balanced is balanced interleaving (Joachims, "Optimizing search engines
// using clickthrough data", KDD 2002, and "Evaluating retrieval performance
// using clickthrough data", 2003). One fair coin decides which list leads;
// then two pointers ka and kb walk down the lists, the one behind (or the
// leader on a tie) contributing its next item unless that item is already
// shown, so every prefix of the merged list is the union of a top-ka of one
// list and a top-kb of the other with |ka-kb| <= 1. The zero value is ready
// to use and safe for concurrent use.
type Balanced struct{}

var _ Policy = Balanced{}

// Name returns "balanced".
func (Balanced) Name() string { return "balanced" }

// Interleave merges a (incumbent) and b (challenger) into at most n slots by
// balanced interleaving, appending to dst[:0]. Each slot's Team is the list
// whose pointer contributed it. When one list is used up the other's pointer
// fills the remaining slots. An item repeated within one list counts at its
// first rank.
func (Balanced) Interleave(dst []Slot, a, b []string, n int, seed uint64) []Slot {
	c := newCoins(seed)
	return balanced(dst, a, b, n, &c)
}

// balanced is Balanced.Interleave with its coin stream passed in.
func balanced(dst []Slot, a, b []string, n int, c *coins) []Slot {
	n = max(0, min(n, len(a)+len(b)))
	dst = resultSlice(dst, n)
	var w workspace
	x := w.ranks(a, b)
	xa, xb := x[:len(a)], x[len(a):]
	aFirst := c.flip()
	ka, kb := 0, 0 // 0-based pointers; the paper's ka-1 and kb-1
	for len(dst) < n && (ka < len(a) || kb < len(b)) {
		if kb == len(b) || ka < len(a) && (ka < kb || ka == kb && aFirst) {
			if xa[ka] != taken {
				dst = append(dst, place(a, xa, xb, ka, Incumbent))
			}
			ka++
			continue
		}
		if xb[kb] != taken {
			dst = append(dst, placeB(b, xa, xb, kb))
		}
		kb++
	}
	return dst
}

// Credit is balanced interleaving's credit rule (Joachims 2002/2003, in
// the precise form of Chapelle, Joachims, Radlinski & Yue, "Large-scale
// validation and analysis of interleaved search evaluation", ACM TOIS 30(1),
// 2012, section 2): let d be the item at the lowest (largest) clicked
// position and k = min{j : A[j] = d or B[j] = d}, the better of d's ranks in
// the two lists; each side earns the weight of the clicks on items it ranks
// within its own top k. An item both lists rank within k credits both, and
// the lowest click decides k for every click.
//
// Under a hedge (see Interleave) the leading Fixed slots are left out and
// the ranks renumbered as the policy saw them, so the rule applies to the
// part of the list balanced interleaving produced; clicks on Fixed slots are
// ignored as if they had not happened. Clicks outside the slots are ignored.
func (Balanced) Credit(slots []Slot, clicks []Click) Score {
	lead := leadingFixed(slots)
	shown := policySlots(slots, lead)
	last := -1 // the lowest credited click, as an index into shown
	for _, c := range clicks {
		if credited(slots, c.Pos) {
			last = max(last, c.Pos-lead)
		}
	}
	if last < 0 {
		return Score{}
	}
	k := betterRank(shown[last])
	var s Score
	for _, c := range clicks {
		if !credited(slots, c.Pos) {
			continue
		}
		sl := shown[c.Pos-lead]
		if sl.RankA > 0 && sl.RankA <= k {
			s.Incumbent += c.Weight
		}
		if sl.RankB > 0 && sl.RankB <= k {
			s.Challenger += c.Weight
		}
	}
	return s
}

// betterRank returns the smaller of a slot's ranks, ignoring a list that
// lacks the item (rank 0).
func betterRank(s Slot) int32 {
	switch {
	case s.RankA == 0:
		return s.RankB
	case s.RankB == 0:
		return s.RankA
	}
	return min(s.RankA, s.RankB)
}
