package merge_test

import (
	"fmt"

	"riffle/merge"
)

func ExampleTeamDraft() {
	incumbent := []string{"trowel", "gloves", "seed-tray", "twine"}
	challenger := []string{"gloves", "kneeler", "trowel", "dibber"}
	slots := merge.TeamDraft{}.Interleave(nil, incumbent, challenger, 4, 42)
	for _, s := range slots {
		fmt.Printf("%-9s %-10s A%d B%d\n", s.Item, s.Team, s.RankA, s.RankB)
	}
	// A click on the third slot credits the team that picked it.
	fmt.Printf("%+v\n", merge.TeamDraft{}.Credit(slots, []merge.Click{{Pos: 2, Weight: 1}}))
	// Output:
	// gloves    challenger A2 B1
	// trowel    incumbent  A1 B3
	// seed-tray incumbent  A3 B0
	// kneeler   challenger A0 B2
	// {Incumbent:1 Challenger:0}
}

func ExampleBalanced() {
	incumbent := []string{"trowel", "gloves", "seed-tray", "twine"}
	challenger := []string{"gloves", "kneeler", "trowel", "dibber"}
	slots := merge.Balanced{}.Interleave(nil, incumbent, challenger, 4, 42)
	for _, s := range slots {
		fmt.Printf("%-9s %-10s A%d B%d\n", s.Item, s.Team, s.RankA, s.RankB)
	}
	// A click on trowel: its better rank is 1, and only the incumbent ranks
	// it within its top 1.
	fmt.Printf("%+v\n", merge.Balanced{}.Credit(slots, []merge.Click{{Pos: 1, Weight: 1}}))
	// Output:
	// gloves    challenger A2 B1
	// trowel    incumbent  A1 B3
	// kneeler   challenger A0 B2
	// seed-tray incumbent  A3 B0
	// {Incumbent:1 Challenger:0}
}

func ExampleInterleave() {
	incumbent := []string{"trowel", "gloves", "seed-tray", "twine"}
	challenger := []string{"kneeler", "dibber", "cloche", "gloves"}
	// The challenger may not take the top slot, and at most one slot: its
	// second pick (dibber) gives way to the incumbent's best unshown item.
	h := merge.Hedge{ChallengerFromSlot: 2, MaxChallengerSlots: 1}
	for _, s := range merge.Interleave(merge.TeamDraft{}, nil, incumbent, challenger, 5, 0, h) {
		fmt.Printf("%-9s %s\n", s.Item, s.Team)
	}
	// Output:
	// trowel    fixed
	// kneeler   challenger
	// gloves    incumbent
	// twine     fixed
	// seed-tray incumbent
}
