package merge

import (
	"fmt"
	"math/rand/v2"
	"testing"
)

// piBenchLists returns two lists of n invented identities sharing about
// half their items in shuffled order.
func piBenchLists(n int, seed uint64) (a, b []string) {
	r := rand.New(rand.NewPCG(seed, 9))
	a = make([]string, n)
	b = make([]string, n)
	for i := range n {
		a[i] = fmt.Sprintf("planter-%06d", i)
		b[i] = a[i]
		if i%2 == 1 {
			b[i] = fmt.Sprintf("planter-%06d", n+i)
		}
	}
	r.Shuffle(n, func(i, j int) { b[i], b[j] = b[j], b[i] })
	return a, b
}

// BenchmarkProbabilistic interleaves two 10-item and two 100-item lists
// into as many slots as one list has.
func BenchmarkProbabilistic(b *testing.B) {
	for _, n := range []int{10, 100} {
		b.Run(fmt.Sprintf("2x%d", n), func(b *testing.B) {
			la, lb := piBenchLists(n, 1)
			dst := make([]Slot, 0, n)
			b.ReportAllocs()
			var seed uint64
			for b.Loop() {
				seed++
				dst = Probabilistic{}.Interleave(dst, la, lb, n, seed)
			}
		})
	}
}

// BenchmarkProbabilisticCredit credits three clicks on a 10-slot list.
func BenchmarkProbabilisticCredit(b *testing.B) {
	la, lb := piBenchLists(10, 1)
	slots := Probabilistic{}.Interleave(nil, la, lb, 10, 1)
	clicks := []Click{{0, 1}, {3, 1}, {7, 3}}
	b.ReportAllocs()
	for b.Loop() {
		Probabilistic{}.Credit(slots, clicks)
	}
}

// BenchmarkOptimized measures the warm path (the overlap structure's
// solution is cached) and the cold one (every call solves the linear
// program), on 10 slots from two 10-item and two 100-item lists.
func BenchmarkOptimized(b *testing.B) {
	for _, n := range []int{10, 100} {
		la, lb := piBenchLists(n, 1)
		b.Run(fmt.Sprintf("warm/2x%d", n), func(b *testing.B) {
			o, _ := NewOptimized("", 0)
			dst := o.Interleave(nil, la, lb, 10, 0)
			b.ReportAllocs()
			var seed uint64
			for b.Loop() {
				seed++
				dst = o.Interleave(dst, la, lb, 10, seed)
			}
		})
		b.Run(fmt.Sprintf("cold/2x%d", n), func(b *testing.B) {
			o, _ := NewOptimized("", -1)
			dst := make([]Slot, 0, 10)
			b.ReportAllocs()
			var seed uint64
			for b.Loop() {
				seed++
				dst = o.Interleave(dst, la, lb, 10, seed)
			}
		})
	}
	b.Run("warm/parallel/2x10", func(b *testing.B) {
		la, lb := piBenchLists(10, 1)
		o, _ := NewOptimized("", 0)
		o.Interleave(nil, la, lb, 10, 0)
		b.ReportAllocs()
		b.RunParallel(func(pb *testing.PB) {
			dst := make([]Slot, 0, 10)
			var seed uint64
			for pb.Next() {
				seed++
				dst = o.Interleave(dst, la, lb, 10, seed)
			}
		})
	})
}
