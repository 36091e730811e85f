package merge

import "math/rand/v2"

// taken marks, in a cross-rank array, an entry that is no longer available:
// a repeat of an item earlier in its own list, or an item already placed.
const taken = -1

// smallItems is the largest len(a)+len(b) whose cross-rank working array
// lives on the stack (768 bytes with its table): two lists of 20, the
// common page of a recommendation route, fit, so the served path does not
// allocate it; stackItems bounds other per-rank scratch arrays kept on the
// stack.
const (
	smallItems = 64
	stackItems = 256
)

// Ranks returns, for each item of a, its 1-based rank in b (inB), and for
// each item of b, its 1-based rank in a (inA). 0 means the other list lacks
// the item; -1 marks a repeat of an item seen earlier in its own list, which
// policies skip. It runs in time linear in len(a)+len(b).
func Ranks(a, b []string) (inB, inA []int32) {
	x := make([]int32, len(a)+len(b))
	crossRanks(x, make([]int32, tableSize(len(x))), a, b)
	return x[:len(a):len(a)], x[len(a):]
}

// tableSize is the open-addressing table length for m items: a power of two
// at least 2m, so the table is at most half full.
func tableSize(m int) int {
	s := 8
	for s < 2*m {
		s <<= 1
	}
	return s
}

// workspace holds the working array of one interleaving. A policy that
// declares it as a local variable keeps the array of short lists on its
// own stack: ranks returns a slice of it, and escape analysis lets that
// stay in the caller's frame.
type workspace struct {
	small [smallItems + 2*smallItems]int32
}

// ranks returns the cross-rank array x (len(a)+len(b) entries) filled by
// crossRanks, carved from w for short lists and from the heap otherwise.
func (w *workspace) ranks(a, b []string) []int32 {
	m := len(a) + len(b)
	if m > smallItems {
		return newWorkspace(a, b)
	}
	buf := w.small[:m+tableSize(m)]
	clear(buf)
	crossRanks(buf[:m], buf[m:], a, b)
	return buf[:m]
}

// newWorkspace returns the cross-rank array x (len(a)+len(b) entries)
// filled by crossRanks, on the heap; see workspace for a stack-friendly
// form.
func newWorkspace(a, b []string) []int32 {
	m := len(a) + len(b)
	buf := make([]int32, m+tableSize(m))
	crossRanks(buf[:m], buf[m:], a, b)
	return buf[:m]
}

// crossRanks fills x[:len(a)] with each a item's rank in b and x[len(a):]
// with each b item's rank in a, as Ranks describes. table must be zeroed,
// of tableSize(len(x)) entries; entry k > 0 refers to x index k-1.
func crossRanks(x, table []int32, a, b []string) {
	mask := uint64(len(table) - 1)
	item := func(k int32) string {
		if int(k) <= len(a) {
			return a[k-1]
		}
		return b[int(k)-1-len(a)]
	}
	for i, s := range a {
		h := stringHash(s) & mask
		for table[h] != 0 && item(table[h]) != s {
			h = (h + 1) & mask
		}
		if table[h] != 0 {
			x[i] = taken
			continue
		}
		table[h] = int32(i + 1)
	}
	for j, s := range b {
		h := stringHash(s) & mask
		for table[h] != 0 && item(table[h]) != s {
			h = (h + 1) & mask
		}
		k := table[h]
		switch {
		case k == 0:
			table[h] = int32(len(a) + j + 1)
		case int(k) > len(a) || x[k-1] != 0:
			x[len(a)+j] = taken // repeat within b
		default:
			x[len(a)+j] = k
			x[k-1] = int32(j + 1)
		}
	}
}

// stringHash hashes s eight bytes at a time, mixing each word with the
// SplitMix64 finaliser's multipliers (Steele, Lea & Flood, "Fast splittable
// pseudorandom number generators", OOPSLA 2014). Results never depend on it:
// a collision only costs a string comparison.
func stringHash(s string) uint64 {
	h := uint64(len(s)) * 0x9e3779b97f4a7c15
	for len(s) >= 8 {
		v := uint64(s[0]) | uint64(s[1])<<8 | uint64(s[2])<<16 | uint64(s[3])<<24 |
			uint64(s[4])<<32 | uint64(s[5])<<40 | uint64(s[6])<<48 | uint64(s[7])<<56
		h = (h ^ v) * 0xbf58476d1ce4e5b9
		h ^= h >> 31
		s = s[8:]
	}
	var v uint64
	for i := 0; i < len(s); i++ {
		v |= uint64(s[i]) << (8 * i)
	}
	h = (h ^ v) * 0x94d049bb133111eb
	return h ^ h>>29
}

// seedStream is the fixed second half of the PCG state; changing it would
// change every interleaving ever served, so it must stay as it is.
const seedStream = 0x726966666c65 // "riffle"

// coins is the stream of fair coin flips a policy draws on. It lives on the
// caller's stack.
type coins struct {
	src rand.PCG
	// scripted makes flip read bits from script, lowest first, instead of
	// src, so that tests can enumerate every outcome exactly.
	scripted bool
	script   uint64
}

// newCoins returns the coin stream for an impression's seed.
func newCoins(seed uint64) coins {
	var c coins
	c.src.Seed(seed, seedStream)
	return c
}

// flip returns one fair coin flip.
func (c *coins) flip() bool {
	if c.scripted {
		b := c.script&1 == 1
		c.script >>= 1
		return b
	}
	return c.src.Uint64()>>63 == 1
}

// resultSlice returns dst emptied, with room for n slots.
func resultSlice(dst []Slot, n int) []Slot {
	if cap(dst) < n {
		return make([]Slot, 0, n)
	}
	return dst[:0]
}
