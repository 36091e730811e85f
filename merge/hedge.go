package merge

// Hedge limits how much of a merged list the challenger may take, to
// protect the live service while a challenger is unproven. The zero value
// imposes nothing.
type Hedge struct {
	// MaxChallengerSlots caps the challenger-team slots of one list; 0 means
	// no cap.
	MaxChallengerSlots int
	// ChallengerFromSlot is the first 1-based position the policy may fill;
	// the positions before it show the incumbent's top items. 0 or 1 means
	// every position.
	ChallengerFromSlot int
}

// Interleave merges a (incumbent) and b (challenger) into at most n slots
// with policy p under hedge h, appending to dst[:0]. A zero h gives exactly
// p.Interleave(dst, a, b, n, seed).
//
// The positions before h.ChallengerFromSlot show the incumbent's top items;
// the rest is p's interleaving of the items not yet shown (if the incumbent
// runs out first, the list ends there, since the challenger may not appear
// that high). Past h.MaxChallengerSlots, each further challenger-team slot
// is replaced by the incumbent's best item not shown anywhere in the list,
// or dropped when there is none. RankA and RankB always refer to the full
// lists a and b.
//
// Every slot a hedge places is marked Fixed and earns no credit: the policy
// did not choose it, so its clicks carry no evidence about which list users
// prefer, and crediting them to the incumbent would bias the comparison
// towards it by construction.
func Interleave(p Policy, dst []Slot, a, b []string, n int, seed uint64, h Hedge) []Slot {
	if h.ChallengerFromSlot <= 1 && h.MaxChallengerSlots <= 0 {
		return p.Interleave(dst, a, b, n, seed)
	}
	n = max(0, min(n, len(a)+len(b)))
	dst = resultSlice(dst, n)
	inB, inA := Ranks(a, b)
	xa, xb := inB, inA // Ranks returns fresh arrays, so they double as working state
	ia := 0
	for len(dst) < min(n, h.ChallengerFromSlot-1) {
		for ia < len(xa) && xa[ia] == taken {
			ia++
		}
		if ia == len(xa) {
			return dst
		}
		dst = append(dst, place(a, xa, xb, ia, Fixed))
	}
	restA, mapA := unplaced(a, xa)
	restB, mapB := unplaced(b, xb)
	mid := p.Interleave(nil, restA, restB, n-len(dst), seed)
	for i := range mid {
		mid[i].RankA = fullRank(mapA, mid[i].RankA)
		mid[i].RankB = fullRank(mapB, mid[i].RankB)
		if mid[i].RankA > 0 {
			xa[mid[i].RankA-1] = taken
		}
	}
	return capChallenger(dst, mid, a, xa, h.MaxChallengerSlots)
}

// unplaced returns the items of list whose cross-rank entry is not taken,
// and for each its 0-based index in list.
func unplaced(list []string, x []int32) ([]string, []int32) {
	rest := make([]string, 0, len(list))
	idx := make([]int32, 0, len(list))
	for i, s := range list {
		if x[i] != taken {
			rest = append(rest, s)
			idx = append(idx, int32(i))
		}
	}
	return rest, idx
}

// fullRank turns a 1-based rank in a sub-list back into one in the full
// list through the sub-list's index map.
func fullRank(idx []int32, r int32) int32 {
	if r <= 0 || int(r) > len(idx) {
		return 0
	}
	return idx[r-1] + 1
}

// capChallenger appends mid to dst, replacing challenger-team slots past
// limit (0 = none) with the incumbent's best items not yet shown. xa marks
// the incumbent's items in dst or mid as taken; for the others it still
// holds their rank in b.
//
// A challenger slot past the cap is not shown, so an incumbent item it held
// is released first: otherwise it would count as shown and, with every
// other incumbent item placed, its slot would vanish instead of coming back
// as the incumbent's.
func capChallenger(dst, mid []Slot, a []string, xa []int32, limit int) []Slot {
	if limit > 0 {
		seen := 0
		for _, s := range mid {
			if s.Team != Challenger {
				continue
			}
			if seen++; seen > limit && s.RankA > 0 {
				xa[s.RankA-1] = s.RankB
			}
		}
	}
	seen, ia := 0, 0
	for _, s := range mid {
		if s.Team == Challenger && limit > 0 {
			seen++
			if seen > limit {
				for ia < len(xa) && xa[ia] == taken {
					ia++
				}
				if ia == len(xa) {
					continue
				}
				s = Slot{Item: a[ia], Team: Fixed, RankA: int32(ia + 1), RankB: xa[ia]}
				xa[ia] = taken
			}
		}
		dst = append(dst, s)
	}
	return dst
}

// leadingFixed returns how many slots at the start of slots are Fixed: the
// part a hedge placed before the policy ran.
func leadingFixed(slots []Slot) int {
	i := 0
	for i < len(slots) && slots[i].Team == Fixed {
		i++
	}
	return i
}

// policySlots returns slots[lead:] with each rank lowered by the number of
// the first lead (Fixed) items ranked above it in the same list, so that
// ranks read as they did in the lists the policy interleaved. With lead 0
// it returns slots itself.
func policySlots(slots []Slot, lead int) []Slot {
	if lead == 0 {
		return slots
	}
	out := make([]Slot, 0, len(slots)-lead)
	for _, s := range slots[lead:] {
		da, db := int32(0), int32(0)
		for _, f := range slots[:lead] {
			if f.RankA > 0 && f.RankA < s.RankA {
				da++
			}
			if f.RankB > 0 && f.RankB < s.RankB {
				db++
			}
		}
		if s.RankA > 0 {
			s.RankA -= da
		}
		if s.RankB > 0 {
			s.RankB -= db
		}
		out = append(out, s)
	}
	return out
}

// credited reports whether a click at pos lands on a slot that can earn
// credit: one inside the list that no hedge placed.
func credited(slots []Slot, pos int) bool {
	return pos >= 0 && pos < len(slots) && slots[pos].Team != Fixed
}
