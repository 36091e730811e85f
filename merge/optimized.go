package merge

import "fmt"

// OptimizedDepth is how many leading slots optimized interleaving draws from
// its linear program. Past it the merged list goes on by team draft: the
// program has up to 2^depth allowed lists, and at depth 10 one solve takes a
// few milliseconds, while slots that deep draw few clicks. It is a constant,
// not an option, because Credit must be able to tell from logged slots alone
// which of them the program placed.
const OptimizedDepth = 10

// DefaultOptimizedCache is the number of solved overlap structures an
// Optimized made with a cache size of 0 keeps.
const DefaultOptimizedCache = 4096

// Rank-difference credit functions of optimized interleaving (Radlinski &
// Craswell, WSDM 2013, section 4.1), by configuration name.
const (
	// CreditLinear credits a click on d with rankA(d) - rankB(d).
	CreditLinear = "linear"
	// CreditInverseRank credits a click on d with 1/rankB(d) - 1/rankA(d).
	CreditInverseRank = "inverse-rank"
)

// Optimized is optimized interleaving (Radlinski & Craswell, "Optimized
// interleaving for online retrieval evaluation", WSDM 2013). The allowed
// merged lists are those whose every prefix is the union of a top-i of one
// list and a top-j of the other, that is each slot shows the best unshown
// item of one of the two lists. A linear program puts a probability on each
// allowed list so that clicks falling uniformly at random on the top k
// slots earn zero expected credit for every k, and among such distributions
// it picks the most sensitive one. A click on item d earns a rank
// difference: positive credit goes to the challenger, negative to the
// incumbent.
//
// When one list runs out within the program's depth, no distribution need
// have zero expected credit at every cutoff (the shorter list's few items
// cannot earn back the credit the other's take); the program then takes
// the distribution of least total absolute expected credit over the
// cutoffs.
//
// Zero expected credit is a property of the credit's size, not its sign:
// Decide, and so a verdict that counts wins and losses, can still lean to
// one side under random clicks. For A = (d1..d10) and B = (d2..d10, d1)
// one random click favours B nine times in ten, since every item but d1
// ranks higher in B, while the expected credit (-9/10 + 9 x 1/10) is zero.
// merge/simulate measures both.
//
// The program depends only on the overlap structure of the two lists' tops
// (for each of the incumbent's top items, its rank among the challenger's),
// so its solutions are cached by that structure in a bounded cache. An
// Optimized is safe for concurrent use; the zero value uses linear credit
// and caches nothing.
type Optimized struct {
	inverse bool // CreditInverseRank rather than CreditLinear
	cache   *optCache
}

var _ Policy = (*Optimized)(nil)

// NewOptimized returns optimized interleaving with the named credit function
// (CreditLinear, also for "", or CreditInverseRank) and room for cacheSize
// solved overlap structures (0 means DefaultOptimizedCache; negative turns
// the cache off). An unknown credit name is an error wrapping ErrBadOption.
func NewOptimized(credit string, cacheSize int) (*Optimized, error) {
	o := &Optimized{}
	switch credit {
	case "", CreditLinear:
	case CreditInverseRank:
		o.inverse = true
	default:
		return nil, fmt.Errorf("optimized: credit %q: %w (want %q or %q)",
			credit, ErrBadOption, CreditLinear, CreditInverseRank)
	}
	if cacheSize == 0 {
		cacheSize = DefaultOptimizedCache
	}
	if cacheSize > 0 {
		o.cache = newOptCache(cacheSize)
	}
	return o, nil
}

// Name returns "optimized".
func (*Optimized) Name() string { return "optimized" }

// Interleave merges a (incumbent) and b (challenger) into at most n slots by
// optimized interleaving, appending to dst[:0]. The first OptimizedDepth
// slots are one allowed list drawn, with seed, from the solved distribution
// for the lists' overlap structure; any further slots are filled by team
// draft from the items left. In the drawn part each slot's Team is the list
// whose best unshown item it was (the one ranking it higher when it was
// both lists' best); credit there does not depend on Team. An item
// repeated within one list counts at its first rank.
func (o *Optimized) Interleave(dst []Slot, a, b []string, n int, seed uint64) []Slot {
	n = max(0, min(n, len(a)+len(b)))
	dst = resultSlice(dst, n)
	var ws workspace
	x := ws.ranks(a, b)
	xa, xb := x[:len(a)], x[len(a):]
	st := newOptStructure(xa, xb, min(n, OptimizedDepth))
	if st.depth == 0 {
		return dst
	}
	sol := o.solution(st.key)
	c := newCoins(seed)
	u := float64(c.src.Uint64()>>11) * 0x1p-53
	k := 0
	for k < len(sol.cum)-1 && sol.cum[k] <= u {
		k++
	}
	for i, v := range sol.lists[k][:st.depth] {
		if v < st.la {
			dst = append(dst, place(a, xa, xb, int(st.posA[v]), sol.teams[k][i]))
		} else {
			dst = append(dst, placeB(b, xa, xb, int(st.posB[st.onlyB[v-st.la]])))
		}
	}
	if len(dst) < n {
		dst = optTail(dst, a, b, xa, xb, n, &c)
	}
	return dst
}

// optTail fills the slots past the drawn part by team draft over the items
// not yet placed, with ranks mapped back to the full lists.
func optTail(dst []Slot, a, b []string, xa, xb []int32, n int, c *coins) []Slot {
	restA, mapA := unplaced(a, xa)
	restB, mapB := unplaced(b, xb)
	tail := teamDraft(nil, restA, restB, n-len(dst), c)
	for _, s := range tail {
		s.RankA = fullRank(mapA, s.RankA)
		s.RankB = fullRank(mapB, s.RankB)
		dst = append(dst, s)
	}
	return dst
}

// Credit is optimized interleaving's rank-difference credit. Let T be the
// number of slots the linear program placed (the list's length, at most
// OptimizedDepth) and rank_L(d) the item's rank in list L, counting ranks
// past T, and absence, as T+1 (the program only sees the lists' top T). A
// click of weight w on one of the first T slots earns w*delta(d), with
// delta = rankA - rankB for linear credit and 1/rankB - 1/rankA for
// inverse-rank: a positive amount goes to Score.Challenger and a negative
// one, negated, to Score.Incumbent, so Decide follows the sign of the total.
// A click on a later slot, placed by team draft, earns its weight for the
// slot's Team. Fixed slots from a hedge earn nothing, and the ranks of the
// slots after leading Fixed ones are read as the policy saw them.
func (o *Optimized) Credit(slots []Slot, clicks []Click) Score {
	lead := leadingFixed(slots)
	shown := policySlots(slots, lead)
	depth := min(len(shown), OptimizedDepth)
	var s Score
	for _, c := range clicks {
		if !credited(slots, c.Pos) {
			continue
		}
		sl := shown[c.Pos-lead]
		if c.Pos-lead >= depth {
			switch sl.Team {
			case Incumbent:
				s.Incumbent += c.Weight
			case Challenger:
				s.Challenger += c.Weight
			}
			continue
		}
		d := o.delta(optRank(sl.RankA, depth), optRank(sl.RankB, depth))
		if d > 0 {
			s.Challenger += c.Weight * d
		} else {
			s.Incumbent -= c.Weight * d
		}
	}
	return s
}

// optRank truncates a logged 1-based rank (0 = absent) to what the program
// of the given depth sees: ranks past depth and absence become depth+1.
func optRank(r int32, depth int) int {
	if r <= 0 || int(r) > depth {
		return depth + 1
	}
	return int(r)
}

// delta is the credit of a click on an item with (truncated) ranks ra in
// the incumbent's list and rb in the challenger's; positive favours the
// challenger.
func (o *Optimized) delta(ra, rb int) float64 {
	if o.inverse {
		return 1/float64(rb) - 1/float64(ra)
	}
	return float64(ra - rb)
}
