package verdict

import (
	"encoding/json"
	"fmt"
	"math"
	"time"

	"riffle/merge"
)

// Params are an experiment's statistical settings. A zero field means its
// default, except Margin, whose zero means no margin.
type Params struct {
	// Alpha is the two-sided significance level. Default 0.05.
	Alpha float64
	// Power is the planned power behind Needed. Default 0.8.
	Power float64
	// MDE is the minimum detectable Delta: it sets Needed and the
	// sequential test's mixture. Default 0.02.
	MDE float64
	// Margin is the non-inferiority and equivalence margin on Delta, in
	// [0, 0.5). Zero means none, so the verdict is never on-par.
	Margin float64
}

// withDefaults fills zero fields and validates the result.
func (p Params) withDefaults() (Params, error) {
	if p.Alpha == 0 {
		p.Alpha = 0.05
	}
	if p.Power == 0 {
		p.Power = 0.8
	}
	if p.MDE == 0 {
		p.MDE = 0.02
	}
	if err := checkPlan(p.Alpha, p.Power, p.MDE); err != nil {
		return p, err
	}
	if !(p.Margin >= 0 && p.Margin < 0.5) {
		return p, fmt.Errorf("%w: margin %v: want a Delta in [0, 0.5)", ErrInput, p.Margin)
	}
	return p, nil
}

// Input is what Compute needs of one experiment: counts and per-user
// sums, whichever store they come from (store.Aggregate.Input fills it), so
// the statistics depend on no storage.
type Input struct {
	// Experiment and Policy are copied to the Status.
	Experiment, Policy string
	// Ramp is the share of users in force getting interleaved lists, copied
	// to the Status; nil when the caller does not know it.
	Ramp *float64
	// Impressions counts every impression served; Interleaved those that
	// showed a merged list.
	Impressions, Interleaved int64
	// Outcomes counts finalised interleaved impressions by merge.Outcome
	// (index 0 none, 1 incumbent win, 2 challenger win, 3 tie).
	Outcomes [4]int64
	// Users holds the same counts per hashed user key; key 0 (no user key)
	// and counts missing here are treated as users of one impression each.
	Users map[uint64][4]int64
	// RecentImpressions interleaved impressions were served over the last
	// RecentSpan, RecentWithFeedback of them finalised with feedback; they
	// give the rate behind the ETA.
	RecentImpressions, RecentWithFeedback int64
	RecentSpan                            time.Duration
	// Params are the statistical settings.
	Params Params
	// Running is the state of the verdict after the previous look, as the
	// last Status.Running returned it; the zero value means no look yet.
	Running Running
	// Now is the time of this look and ConfigHash the hash of the config
	// in force; both only go into a decision made at this look.
	Now        time.Time
	ConfigHash string
}

// check validates the counts.
func (in *Input) check() error {
	type count struct {
		name string
		v    int64
	}
	for _, c := range []count{
		{"impressions", in.Impressions},
		{"interleaved", in.Interleaved},
		{"recent impressions", in.RecentImpressions},
		{"recent with feedback", in.RecentWithFeedback},
	} {
		if c.v < 0 {
			return fmt.Errorf("%w: %s %d: counts must be >= 0", ErrInput, c.name, c.v)
		}
	}
	for o, v := range in.Outcomes {
		if v < 0 {
			return fmt.Errorf("%w: outcomes[%d] (%s) %d: counts must be >= 0", ErrInput, o, merge.Outcome(o), v)
		}
	}
	if in.RecentSpan < 0 {
		return fmt.Errorf("%w: recent span %v is negative", ErrInput, in.RecentSpan)
	}
	return in.Running.check()
}

// Duration is a time.Duration that marshals to JSON as its Go duration
// string, e.g. "26h30m0s".
type Duration time.Duration

// MarshalJSON encodes d as a Go duration string.
func (d Duration) MarshalJSON() ([]byte, error) {
	return json.Marshal(time.Duration(d).String())
}

// UnmarshalJSON decodes a Go duration string.
func (d *Duration) UnmarshalJSON(b []byte) error {
	var s string
	if err := json.Unmarshal(b, &s); err != nil {
		return fmt.Errorf("verdict: duration: want a string such as \"1h30m\": %w", err)
	}
	v, err := time.ParseDuration(s)
	if err != nil {
		return fmt.Errorf("verdict: duration: %w", err)
	}
	*d = Duration(v)
	return nil
}

// etaFor returns how long needed more impressions with feedback take at the
// recent rate; nil when the rate is unknown or the time beyond a Duration.
func etaFor(needed int64, in *Input) *Duration {
	if needed == 0 {
		d := Duration(0)
		return &d
	}
	if in.RecentSpan <= 0 || in.RecentImpressions == 0 {
		return nil
	}
	rate := float64(in.RecentImpressions) / in.RecentSpan.Seconds()
	o := in.Outcomes
	withFeedback := o[merge.IncumbentWin] + o[merge.ChallengerWin] + o[merge.Tie]
	var share float64
	switch {
	case withFeedback+o[merge.NoFeedback] > 0:
		share = float64(withFeedback) / float64(withFeedback+o[merge.NoFeedback])
	default:
		share = float64(in.RecentWithFeedback) / float64(in.RecentImpressions)
	}
	if share <= 0 {
		return nil
	}
	secs := float64(needed) / (rate * share)
	if secs > math.MaxInt64/1e9/2 {
		return nil
	}
	d := Duration(time.Duration(secs * 1e9).Round(time.Second))
	return &d
}
