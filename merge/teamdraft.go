package merge

// TeamDraft is team-draft interleaving (Radlinski, Kurup & Joachims, "How
// does clickthrough data reflect retrieval quality?", CIKM 2008, Algorithm
// 2). Like captains picking teams, at each round the list whose team has
// fewer picks so far picks next (a fair coin decides when the teams are
// even), and it picks its own highest-ranked item not yet placed. Credit
// goes to the team that picked the clicked item. The zero value is ready to
// use and safe for concurrent use.
type TeamDraft struct{}

var _ Policy = TeamDraft{}

// Name returns "team-draft".
func (TeamDraft) Name() string { return "team-draft" }

// Interleave merges a (incumbent) and b (challenger) into at most n slots by
// team draft, appending to dst[:0]. Each slot's Team is the team that picked
// it. Once either list has no unplaced item left, the other fills the
// remaining slots in its own order (the paper stops there; serving needs the
// full length). An item repeated within one list counts at its first rank.
func (TeamDraft) Interleave(dst []Slot, a, b []string, n int, seed uint64) []Slot {
	c := newCoins(seed)
	return teamDraft(dst, a, b, n, &c)
}

// teamDraft is TeamDraft.Interleave with its coin stream passed in.
func teamDraft(dst []Slot, a, b []string, n int, c *coins) []Slot {
	n = max(0, min(n, len(a)+len(b)))
	dst = resultSlice(dst, n)
	var w workspace
	x := w.ranks(a, b)
	xa, xb := x[:len(a)], x[len(a):]
	ia, ib := 0, 0 // each team's next candidate: its best item not yet placed
	na, nb := 0, 0 // picks so far per team
	for len(dst) < n {
		for ia < len(xa) && xa[ia] == taken {
			ia++
		}
		for ib < len(xb) && xb[ib] == taken {
			ib++
		}
		hasA, hasB := ia < len(xa), ib < len(xb)
		switch {
		case hasA && (!hasB || na < nb || na == nb && c.flip()):
			dst = append(dst, place(a, xa, xb, ia, Incumbent))
			na++
		case hasB:
			dst = append(dst, placeB(b, xa, xb, ib))
			nb++
		default:
			return dst
		}
	}
	return dst
}

// place takes a[i] for team t, marking it (and its copy in b) as placed.
func place(a []string, xa, xb []int32, i int, t Team) Slot {
	rb := xa[i]
	xa[i] = taken
	if rb > 0 {
		xb[rb-1] = taken
	}
	return Slot{Item: a[i], Team: t, RankA: int32(i + 1), RankB: rb}
}

// placeB takes b[j] for the challenger, marking it (and its copy in a) as
// placed.
func placeB(b []string, xa, xb []int32, j int) Slot {
	ra := xb[j]
	xb[j] = taken
	if ra > 0 {
		xa[ra-1] = taken
	}
	return Slot{Item: b[j], Team: Challenger, RankA: ra, RankB: int32(j + 1)}
}

// Credit is team-draft's credit rule (Radlinski, Kurup & Joachims 2008,
// section 4): each click's weight goes to the team that picked the clicked
// slot, whichever lists also hold the item. Fixed slots, placed by a hedge
// rather than by the draft, earn nothing, and clicks outside the slots are
// ignored.
func (TeamDraft) Credit(slots []Slot, clicks []Click) Score {
	var s Score
	for _, c := range clicks {
		if c.Pos < 0 || c.Pos >= len(slots) {
			continue
		}
		switch slots[c.Pos].Team {
		case Incumbent:
			s.Incumbent += c.Weight
		case Challenger:
			s.Challenger += c.Weight
		}
	}
	return s
}
