package store

import (
	"testing"
	"time"

	"riffle/merge/verdict"
)

func TestAggregateInput(t *testing.T) {
	a := Aggregate{Experiment: "spring-refresh", Policy: "balanced", Impressions: 10, Interleaved: 8,
		Outcomes: [4]int64{2, 3, 2, 1}, Users: map[uint64][4]int64{4: {2, 3, 2, 1}},
		RecentImpressions: 8, RecentWithFeedback: 6, RecentSpan: time.Minute}
	in := a.Input(verdict.Params{Margin: 0.01})
	if in.Experiment != a.Experiment || in.Policy != a.Policy || in.Impressions != 10 || in.Interleaved != 8 ||
		in.Outcomes != a.Outcomes || in.Users[4] != a.Users[4] || in.RecentImpressions != 8 ||
		in.RecentWithFeedback != 6 || in.RecentSpan != time.Minute || in.Params.Margin != 0.01 || in.Ramp != nil {
		t.Errorf("Input(%+v) = %+v", a, in)
	}
}
