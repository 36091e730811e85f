package merge

// optKey is the overlap structure of two lists' tops, which is all the
// linear program depends on: the depth T it places, how many items of each
// list's top T there are (la, lb), and for each of the incumbent's top
// items its 1-based rank among the challenger's top T (0 when not there).
type optKey [3 + OptimizedDepth]uint8

// optStructure is one request's overlap structure together with where the
// program's abstract items sit in the concrete lists. Abstract item v < la
// is the incumbent's v-th top item; v >= la is the (v-la)-th of the
// challenger's top items that the incumbent's top lacks.
type optStructure struct {
	key    optKey
	depth  int
	la, lb uint8
	posA   [OptimizedDepth]int32 // index in a of each incumbent top item
	posB   [OptimizedDepth]int32 // index in b of each challenger top item
	onlyB  [OptimizedDepth]uint8 // for v >= la, the index into posB
}

// newOptStructure reads the structure of the lists' tops of length t from
// their cross ranks (see crossRanks; repeats are skipped).
func newOptStructure(xa, xb []int32, t int) optStructure {
	var st optStructure
	for i := 0; i < len(xa) && int(st.la) < t; i++ {
		if xa[i] != taken {
			st.posA[st.la] = int32(i)
			st.la++
		}
	}
	for j := 0; j < len(xb) && int(st.lb) < t; j++ {
		if xb[j] != taken {
			st.posB[st.lb] = int32(j)
			st.lb++
		}
	}
	var inA [OptimizedDepth]bool
	matched := 0
	for i := range st.la {
		rb := xa[st.posA[i]] // 1-based index into b, 0 when b lacks it
		for j := range st.lb {
			if rb > 0 && st.posB[j] == rb-1 {
				st.key[3+i] = j + 1
				inA[j] = true
				matched++
				break
			}
		}
	}
	k := 0
	for j := range st.lb {
		if !inA[j] {
			st.onlyB[k] = j
			k++
		}
	}
	st.depth = min(t, int(st.la)+int(st.lb)-matched)
	st.key[0], st.key[1], st.key[2] = uint8(st.depth), st.la, st.lb
	return st
}

// optSolution is a solved distribution over the allowed lists of one
// structure, keeping only lists of positive probability.
type optSolution struct {
	lists [][OptimizedDepth]uint8 // abstract items, slot by slot
	teams [][OptimizedDepth]Team  // whose best unshown item each slot was
	p     []float64               // probability of each list
	cum   []float64               // running sum of p, ending at 1
}

// optLists is every allowed list of one structure, in abstract items.
type optLists struct {
	depth, la int
	exhausted bool    // the depth shows every item of both tops
	bOrder    []uint8 // abstract item at each rank of the challenger's top
	lists     [][OptimizedDepth]uint8
	teams     [][OptimizedDepth]Team
}

// optEnumerate lists every allowed list of key's structure: at each slot the
// best unshown item of either list. There are at most 2^depth.
func optEnumerate(key optKey) *optLists {
	e := &optLists{depth: int(key[0]), la: int(key[1])}
	extra := uint8(e.la)
	for j := range int(key[2]) {
		v := extra
		for i := range e.la {
			if int(key[3+i]) == j+1 {
				v = uint8(i)
			}
		}
		if v == extra {
			extra++
		}
		e.bOrder = append(e.bOrder, v)
	}
	e.exhausted = int(extra) == e.depth
	var cur [OptimizedDepth]uint8
	var team [OptimizedDepth]Team
	e.walk(0, 0, cur, team)
	return e
}

// walk extends the allowed prefix of length k (items marked in used) by
// each list's best unshown item in turn.
func (e *optLists) walk(k int, used uint32, cur [OptimizedDepth]uint8, team [OptimizedDepth]Team) {
	if k == e.depth {
		e.lists = append(e.lists, cur)
		e.teams = append(e.teams, team)
		return
	}
	ca, cb := -1, -1
	for i := 0; i < e.la && ca < 0; i++ {
		if used&(1<<i) == 0 {
			ca = i
		}
	}
	rb := -1 // 0-based rank of cb in the challenger's top
	for j := 0; j < len(e.bOrder) && cb < 0; j++ {
		if v := int(e.bOrder[j]); used&(1<<v) == 0 {
			cb, rb = v, j
		}
	}
	if ca >= 0 {
		cur[k], team[k] = uint8(ca), Incumbent
		if ca == cb && rb < ca {
			team[k] = Challenger
		}
		e.walk(k+1, used|1<<ca, cur, team)
	}
	if cb >= 0 && cb != ca {
		cur[k], team[k] = uint8(cb), Challenger
		e.walk(k+1, used|1<<cb, cur, team)
	}
}

// ranks returns abstract item v's truncated ranks in the two lists' tops
// (depth+1 where a top lacks it).
func (e *optLists) ranks(v uint8) (ra, rb int) {
	ra, rb = e.depth+1, e.depth+1
	if int(v) < e.la {
		ra = int(v) + 1
	}
	for j, u := range e.bOrder {
		if u == v {
			rb = j + 1
		}
	}
	return ra, rb
}
