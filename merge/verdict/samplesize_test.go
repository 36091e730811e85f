package verdict

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"
)

func TestSampleSizeTextbook(t *testing.T) {
	// One-sample proportion, p0 = 0.5 against p1 = 0.55, two-sided alpha
	// 0.05, power 0.8: ((1.95996 * 0.5 + 0.84162 * sqrt(0.2475)) / 0.05)^2
	// = 782.5, rounded up to 783 (textbook computation; common practice).
	got, err := SampleSize(0.05, 0.8, 0.05)
	if err != nil {
		t.Fatal(err)
	}
	if got != 783 {
		t.Errorf("SampleSize(0.05, 0.8, 0.05) = %d, want 783", got)
	}
}

func TestSampleSizeMonotone(t *testing.T) {
	base, _ := SampleSize(0.05, 0.8, 0.02)
	for _, c := range []struct {
		name              string
		alpha, power, mde float64
		wantMoreThanBase  bool
	}{
		{"smaller alpha", 0.01, 0.8, 0.02, true},
		{"more power", 0.05, 0.9, 0.02, true},
		{"smaller effect", 0.05, 0.8, 0.01, true},
		{"larger effect", 0.05, 0.8, 0.04, false},
	} {
		got, err := SampleSize(c.alpha, c.power, c.mde)
		if err != nil {
			t.Fatal(err)
		}
		if (got > base) != c.wantMoreThanBase {
			t.Errorf("%s: SampleSize = %d against %d at the base; want more = %v", c.name, got, base, c.wantMoreThanBase)
		}
	}
}

func TestSampleSizeBadInput(t *testing.T) {
	for _, c := range []struct{ alpha, power, mde float64 }{
		{0, 0.8, 0.02}, {0.05, 1, 0.02}, {0.05, 0.8, 0}, {0.05, 0.8, 0.5}, {0.05, 0.8, math.NaN()},
	} {
		if _, err := SampleSize(c.alpha, c.power, c.mde); !errors.Is(err, ErrInput) {
			t.Errorf("SampleSize(%v, %v, %v) error = %v, want ErrInput", c.alpha, c.power, c.mde, err)
		}
		if _, err := SequentialSampleSize(c.alpha, c.power, c.mde); !errors.Is(err, ErrInput) {
			t.Errorf("SequentialSampleSize(%v, %v, %v) error = %v, want ErrInput", c.alpha, c.power, c.mde, err)
		}
	}
}

// A seeded Monte Carlo of the always-valid test under Delta = mde: the
// share of 1000 experiments that have rejected by SequentialSampleSize
// impressions must be about the planned power. The approximation is
// built to err on the safe side, so allow 0.03 below (about two and a half
// standard errors at 1000 experiments) and at most 0.12 above.
func TestSequentialSampleSizePower(t *testing.T) {
	const experiments, alpha, power, mde = 1000, 0.05, 0.8, 0.05
	n, err := SequentialSampleSize(alpha, power, mde)
	if err != nil {
		t.Fatal(err)
	}
	fixed, _ := SampleSize(alpha, power, mde)
	if n <= fixed {
		t.Errorf("sequential size %d not above the fixed-sample size %d: always-valid tests pay for peeking", n, fixed)
	}
	threshold := math.Log(1 / alpha)
	r := rand.New(rand.NewPCG(23, 29))
	hits := 0
	for range experiments {
		q := newSequence(MixtureForMDE(mde))
		for range n {
			q.add(r.Float64() < 0.5+mde)
			if q.logLR >= threshold {
				hits++
				break
			}
		}
	}
	got := float64(hits) / experiments
	t.Logf("sequential size %d (fixed %d): power %.3f", n, fixed, got)
	if got < power-0.03 || got > power+0.12 {
		t.Errorf("power at the sequential size %d is %.3f, want about %v (-0.03, +0.12)", n, got, power)
	}
}
