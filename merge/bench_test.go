package merge

import (
	"fmt"
	"math/rand/v2"
	"testing"
)

// benchLists returns two lists of n SKU-like identities sharing about half
// their items in a shuffled order, like two models ranking one catalogue.
func benchLists(n int) (a, b []string) {
	r := rand.New(rand.NewPCG(1, 2))
	a = make([]string, n)
	b = make([]string, n)
	for i := range n {
		a[i] = fmt.Sprintf("garden-%06d", i)
		if i%2 == 0 {
			b[i] = a[i]
		} else {
			b[i] = fmt.Sprintf("garden-%06d", n+i)
		}
	}
	r.Shuffle(n, func(i, j int) { b[i], b[j] = b[j], b[i] })
	return a, b
}

func benchPolicy(b *testing.B, p Policy) {
	for _, n := range []int{10, 20, 100} { // 20: the bench's page size
		b.Run(fmt.Sprintf("2x%d", n), func(b *testing.B) {
			la, lb := benchLists(n)
			dst := make([]Slot, 0, n)
			b.ReportAllocs()
			var seed uint64
			for b.Loop() {
				seed++
				dst = p.Interleave(dst, la, lb, n, seed)
			}
		})
	}
}

func BenchmarkTeamDraft(b *testing.B) { benchPolicy(b, TeamDraft{}) }

func BenchmarkBalanced(b *testing.B) { benchPolicy(b, Balanced{}) }

// BenchmarkTeamDraftFresh allocates the result each time, as a caller
// without a reusable buffer would.
func BenchmarkTeamDraftFresh(b *testing.B) {
	la, lb := benchLists(10)
	b.ReportAllocs()
	var seed uint64
	for b.Loop() {
		seed++
		_ = TeamDraft{}.Interleave(nil, la, lb, 10, seed)
	}
}

func BenchmarkInterleaveHedged(b *testing.B) {
	la, lb := benchLists(10)
	dst := make([]Slot, 0, 10)
	h := Hedge{ChallengerFromSlot: 2, MaxChallengerSlots: 3}
	b.ReportAllocs()
	var seed uint64
	for b.Loop() {
		seed++
		dst = Interleave(TeamDraft{}, dst, la, lb, 10, seed, h)
	}
}
