package breakdown

import (
	"time"

	"riffle/merge/verdict"
)

// Point is the verdict's statistics over the finalised impressions served
// up to Time.
type Point struct {
	Time         time.Time        `json:"time"`
	WithFeedback int64            `json:"with_feedback"`
	Delta        float64          `json:"delta"`
	CI           verdict.Interval `json:"ci"`
	CSDelta      verdict.Interval `json:"cs_delta"`
	PValue       float64          `json:"p_value"`
	Verdict      verdict.Verdict  `json:"verdict"`
}

// Decision is where the cumulative verdict first left undecided.
type Decision struct {
	Point
	// Finals is how many finalised impressions (with feedback or not) had
	// been read when it did.
	Finals int `json:"finals"`
}

// Timeline computes the verdict over growing prefixes of finals (oldest
// first) at about n evenly spaced points, the last one over all of them,
// and the first prefix at which the verdict was no longer undecided (nil
// if it never was), found exactly by bisection between the points around
// it. A prefix always ends at a change of time, so impressions served at
// one instant count together whatever their order. Delta and its
// intervals are computed as verdict.Compute does, with the variance
// clustered by user.
func Timeline(finals []Final, p verdict.Params, n int) ([]Point, *Decision, error) {
	var ends []int // prefix lengths that end at a change of time
	for k := 1; k <= len(finals); k++ {
		if k == len(finals) || !finals[k].Time.Equal(finals[k-1].Time) {
			ends = append(ends, k)
		}
	}
	if len(ends) == 0 {
		return nil, nil, nil
	}
	n = max(1, min(n, len(ends)))
	var pts []Point
	prev, decided := -1, -1 // indexes into ends
	for i := 1; i <= n; i++ {
		e := i*len(ends)/n - 1
		pt, err := at(finals, ends[e], p)
		if err != nil {
			return nil, nil, err
		}
		if decided < 0 && pt.Verdict != verdict.Undecided {
			if decided, err = bisect(finals, ends, prev, e, p); err != nil {
				return nil, nil, err
			}
		}
		pts = append(pts, pt)
		prev = e
	}
	if decided < 0 {
		return pts, nil, nil
	}
	pt, err := at(finals, ends[decided], p)
	if err != nil {
		return nil, nil, err
	}
	return pts, &Decision{Point: pt, Finals: ends[decided]}, nil
}

// bisect returns the smallest index e in (lo, hi] of ends whose prefix's
// verdict is decided, given that hi's is.
func bisect(finals []Final, ends []int, lo, hi int, p verdict.Params) (int, error) {
	for hi-lo > 1 {
		mid := (lo + hi) / 2
		pt, err := at(finals, ends[mid], p)
		if err != nil {
			return 0, err
		}
		if pt.Verdict != verdict.Undecided {
			hi = mid
		} else {
			lo = mid
		}
	}
	return hi, nil
}

// at computes the statistics over finals[:k].
func at(finals []Final, k int, p verdict.Params) (Point, error) {
	in := verdict.Input{Users: map[uint64][4]int64{}, Params: p}
	for _, f := range finals[:k] {
		in.Outcomes[f.Outcome]++
		if f.User != 0 {
			c := in.Users[f.User]
			c[f.Outcome]++
			in.Users[f.User] = c
		}
	}
	in.Interleaved = int64(k)
	in.Impressions = in.Interleaved
	s, err := verdict.Compute(in)
	if err != nil {
		return Point{}, err
	}
	return Point{Time: finals[k-1].Time, WithFeedback: s.WithFeedback, Delta: s.Delta, CI: s.CI,
		CSDelta: s.CSDelta, PValue: s.PValue, Verdict: s.Verdict}, nil
}
