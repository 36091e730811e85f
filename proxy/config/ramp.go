package config

import "time"

// EffectiveRamp returns the share of users, in [0,1], who get interleaved
// lists at now under the configured ramp and schedule. Guardrails are not
// considered here: whoever trips one overrides the result with 0.
//
// The schedule counts from Experiment.Start when it is set, else from start
// (the time the store first saw the experiment). Before the first stage
// applies, the base Experiment.Ramp is in force; ApplyDefaults makes it 0
// when a schedule is given and ramp is not, and 1 when neither is. Stage i
// applies from start+After until the next stage does, so with stages sorted
// by After (Validate insists) the last stage whose time has come wins. When
// both Start and start are zero the schedule is taken to begin now: stages
// with After 0 apply and later ones wait. A nil Ramp counts as its default.
func (c *Config) EffectiveRamp(now, start time.Time) float64 {
	e := &c.Experiment
	if !e.Start.IsZero() {
		start = e.Start
	}
	if start.IsZero() {
		start = now
	}
	ramp := 1.0
	switch {
	case e.Ramp != nil:
		ramp = *e.Ramp
	case len(e.Schedule) > 0:
		ramp = 0
	}
	elapsed := now.Sub(start)
	for _, s := range e.Schedule {
		if elapsed >= s.After {
			ramp = s.Ramp
		}
	}
	return min(max(ramp, 0), 1)
}

// NextStage returns when the next schedule stage after now takes effect,
// counting from the same start as EffectiveRamp, and false when no stage is
// still to come.
func (c *Config) NextStage(now, start time.Time) (time.Time, bool) {
	e := &c.Experiment
	if !e.Start.IsZero() {
		start = e.Start
	}
	if start.IsZero() {
		start = now
	}
	for _, s := range e.Schedule {
		if at := start.Add(s.After); at.After(now) {
			return at, true
		}
	}
	return time.Time{}, false
}
