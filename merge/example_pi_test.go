package merge_test

import (
	"fmt"

	"riffle/merge"
)

func ExampleRankProbabilities() {
	// The first draw of probabilistic interleaving from a list of 10
	// items, with the published tau of 3.
	for r, p := range merge.RankProbabilities(10, 3)[:4] {
		fmt.Printf("rank %d: %.3f\n", r+1, p)
	}
	// Output:
	// rank 1: 0.835
	// rank 2: 0.104
	// rank 3: 0.031
	// rank 4: 0.013
}

func ExampleProbabilistic() {
	incumbent := []string{"trowel", "gloves", "seed-tray", "twine"}
	challenger := []string{"gloves", "kneeler", "trowel", "dibber"}
	slots := merge.Probabilistic{}.Interleave(nil, incumbent, challenger, 4, 42)
	for _, s := range slots {
		fmt.Printf("%-9s %-10s PA %.3f PB %.3f\n", s.Item, s.Team, s.PA, s.PB)
	}
	// The credit is the posterior probability of each side having earned more.
	s := merge.Probabilistic{}.Credit(slots, []merge.Click{{Pos: 0, Weight: 1}})
	fmt.Printf("incumbent %.3f challenger %.3f\n", s.Incumbent, s.Challenger)
	// Output:
	// gloves    challenger PA 0.106 PB 0.849
	// kneeler   challenger PA 0.000 PB 0.704
	// trowel    challenger PA 0.950 PB 0.703
	// twine     incumbent  PA 0.297 PB 0.000
	// incumbent 0.111 challenger 0.889
}

func ExampleOptimized() {
	o, err := merge.NewOptimized(merge.CreditLinear, 0)
	if err != nil {
		panic(err)
	}
	incumbent := []string{"trowel", "gloves", "seed-tray", "twine"}
	challenger := []string{"gloves", "kneeler", "trowel", "dibber"}
	slots := o.Interleave(nil, incumbent, challenger, 4, 42)
	for _, s := range slots {
		fmt.Printf("%-9s A%d B%d\n", s.Item, s.RankA, s.RankB)
	}
	// A click on an item earns its rank in the incumbent's list minus its
	// rank in the challenger's (absent counts as 5 here).
	fmt.Printf("%+v\n", o.Credit(slots, []merge.Click{{Pos: 0, Weight: 1}}))
	// Output:
	// trowel    A1 B3
	// gloves    A2 B1
	// kneeler   A0 B2
	// dibber    A0 B4
	// {Incumbent:2 Challenger:0}
}
