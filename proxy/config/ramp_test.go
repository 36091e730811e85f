package config

import (
	"testing"
	"time"
)

func TestEffectiveRamp(t *testing.T) {
	t0 := time.Date(2026, 4, 1, 6, 0, 0, 0, time.UTC)
	stages := []Stage{{After: time.Hour, Ramp: 0.05}, {After: 24 * time.Hour, Ramp: 0.2}, {After: 72 * time.Hour, Ramp: 0.5}}
	tests := []struct {
		name       string
		ramp       *float64
		schedule   []Stage
		start      time.Time // Experiment.Start
		now, first time.Time // the call's arguments
		want       float64
	}{
		{"no schedule, default", nil, nil, time.Time{}, t0, t0, 1},
		{"no schedule, given", ptr(0.3), nil, time.Time{}, t0, t0, 0.3},
		{"before the first stage, default base", nil, stages, time.Time{}, t0.Add(59 * time.Minute), t0, 0},
		{"before the first stage, given base", ptr(0.01), stages, time.Time{}, t0.Add(59 * time.Minute), t0, 0.01},
		{"first stage starts exactly at start+after", nil, stages, time.Time{}, t0.Add(time.Hour), t0, 0.05},
		{"inside the second stage", nil, stages, time.Time{}, t0.Add(30 * time.Hour), t0, 0.2},
		{"last stage stays", nil, stages, time.Time{}, t0.Add(1000 * time.Hour), t0, 0.5},
		{"Start overrides the store's first sight", nil, stages, t0.Add(48 * time.Hour), t0.Add(49 * time.Hour), t0, 0.05},
		{"Start in the future", ptr(0.0), stages, t0.Add(48 * time.Hour), t0, t0, 0},
		{"unknown start: only stages at 0 apply", nil, []Stage{{After: 0, Ramp: 0.1}, {After: time.Hour, Ramp: 1}}, time.Time{}, t0, time.Time{}, 0.1},
		{"ramp down is allowed", nil, []Stage{{After: 0, Ramp: 0.5}, {After: time.Hour, Ramp: 0.1}}, time.Time{}, t0.Add(2 * time.Hour), t0, 0.1},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			c := &Config{Experiment: Experiment{Ramp: tt.ramp, Schedule: tt.schedule, Start: tt.start}}
			if got := c.EffectiveRamp(tt.now, tt.first); got != tt.want {
				t.Errorf("EffectiveRamp: got %v, want %v", got, tt.want)
			}
			// Parse's defaults must not change the answer.
			d := *c
			d.ApplyDefaults()
			if got := d.EffectiveRamp(tt.now, tt.first); got != tt.want {
				t.Errorf("EffectiveRamp after ApplyDefaults: got %v, want %v", got, tt.want)
			}
		})
	}
}

func TestNextStage(t *testing.T) {
	t0 := time.Date(2026, 4, 1, 6, 0, 0, 0, time.UTC)
	c := &Config{Experiment: Experiment{Schedule: []Stage{{After: time.Hour, Ramp: 0.1}, {After: 24 * time.Hour, Ramp: 1}}}}
	tests := []struct {
		now    time.Time
		want   time.Time
		wantOK bool
	}{
		{t0, t0.Add(time.Hour), true},
		{t0.Add(time.Hour), t0.Add(24 * time.Hour), true},
		{t0.Add(24 * time.Hour), time.Time{}, false},
	}
	for _, tt := range tests {
		got, ok := c.NextStage(tt.now, t0)
		if !got.Equal(tt.want) || ok != tt.wantOK {
			t.Errorf("NextStage(%v): got %v, %v, want %v, %v", tt.now.Sub(t0), got, ok, tt.want, tt.wantOK)
		}
	}
}
