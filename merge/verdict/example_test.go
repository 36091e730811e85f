package verdict_test

import (
	"fmt"

	"riffle/merge"
	"riffle/merge/verdict"
)

// A week of a garden-supply shop's "you may also like" shelf: the
// challenger won 5,400 impressions, the incumbent 4,600, 1,000 were ties.
func ExampleCompute() {
	var o [4]int64
	o[merge.NoFeedback] = 20000
	o[merge.IncumbentWin] = 4600
	o[merge.ChallengerWin] = 5400
	o[merge.Tie] = 1000
	s, err := verdict.Compute(verdict.Input{Experiment: "seedling-shelf", Outcomes: o})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("Delta %+.4f in [%+.4f, %+.4f]\n", s.Delta, s.CI[0], s.CI[1])
	fmt.Printf("verdict %s, always-valid p < alpha: %v\n", s.Verdict, s.PValue < s.Alpha)
	// Output:
	// Delta +0.0364 in [+0.0274, +0.0453]
	// verdict challenger-better, always-valid p < alpha: true
}

// Planning before starting: impressions with feedback needed to detect a
// Delta of 0.05 at alpha 0.05 with power 0.8.
func ExampleSampleSize() {
	fixed, _ := verdict.SampleSize(0.05, 0.8, 0.05)
	seq, _ := verdict.SequentialSampleSize(0.05, 0.8, 0.05)
	fmt.Println(fixed, seq > fixed)
	// Output:
	// 783 true
}
