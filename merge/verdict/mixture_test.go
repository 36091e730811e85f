package verdict

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/integrate/quad"
	"gonum.org/v1/gonum/stat/distuv"
)

func TestMixtureForMDEStdDev(t *testing.T) {
	for _, mde := range []float64{0.005, 0.02, 0.05, 0.1, 0.25} {
		m := MixtureForMDE(mde)
		// gonum's Beta distribution as the reference for the spread.
		got := distuv.Beta{Alpha: m.A, Beta: m.B}.StdDev()
		if m.A != m.B || math.Abs(got-mde) > 1e-12 {
			t.Errorf("MixtureForMDE(%v) = %+v with sd %v, want symmetric with sd %v", mde, m, got, mde)
		}
	}
	if m := MixtureForMDE(0.4); m.A != 1 || m.B != 1 {
		t.Errorf("MixtureForMDE(0.4) = %+v, want the uniform Beta(1, 1)", m)
	}
}

// The closed form against numerical integration of the mixture
// likelihood, int p^s (1-p)^f Beta(p; a, b) dp / p0^s (1-p0)^f, with
// gonum's quadrature and Beta density.
func TestLogLRAgainstQuadrature(t *testing.T) {
	cases := []struct {
		m       Mixture
		s, f, p float64
	}{
		{Mixture{1, 1}, 0, 0, 0.5},
		{Mixture{1, 1}, 7, 3, 0.5},
		{Mixture{2, 2}, 10, 7, 0.5},
		{Mixture{49.5, 49.5}, 60, 40, 0.5},
		{Mixture{3, 5}, 12, 30, 0.3},
		{Mixture{312, 312}, 550, 450, 0.5},
		{Mixture{2, 2}, 2.5, 4.75, 0.6},
	}
	for _, c := range cases {
		got, err := c.m.LogLR(c.s, c.f, c.p)
		if err != nil {
			t.Fatal(err)
		}
		prior := distuv.Beta{Alpha: c.m.A, Beta: c.m.B}
		integrand := func(p float64) float64 {
			return math.Exp(c.s*math.Log(p/c.p) + c.f*math.Log((1-p)/(1-c.p)) + prior.LogProb(p))
		}
		want := math.Log(quad.Fixed(integrand, 0, 1, 500, nil, 0))
		if math.Abs(got-want) > 1e-6 {
			t.Errorf("%+v.LogLR(%v, %v, %v) = %.9f, want %.9f (quadrature)", c.m, c.s, c.f, c.p, got, want)
		}
	}
}

func TestSequenceMatchesClosedForm(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	m := MixtureForMDE(0.05)
	q := newSequence(m)
	for i := range 3000 {
		q.add(r.Float64() < 0.53)
		want, _ := m.LogLR(q.s, q.f, 0.5)
		if math.Abs(q.logLR-want) > 1e-8*max(1, math.Abs(want)) {
			t.Fatalf("after %d observations incremental log LR = %v, closed form %v", i+1, q.logLR, want)
		}
	}
}

// The confidence sequence excludes 1/2 exactly when the always-valid
// p-value is below alpha: they are the same test.
func TestConfidenceSequenceMatchesPValue(t *testing.T) {
	m := MixtureForMDE(0.02)
	for _, c := range []struct{ s, f float64 }{
		{0, 0}, {10, 0}, {0, 10}, {520, 480}, {1100, 1000}, {1200, 1000}, {5300, 4700}, {4700, 5300}, {40, 2},
	} {
		for _, alpha := range []float64{0.01, 0.05, 0.2} {
			cs, err := m.ConfidenceSequence(c.s, c.f, alpha)
			if err != nil {
				t.Fatal(err)
			}
			p, _ := m.PValue(c.s, c.f)
			if excluded := !cs.Contains(0.5); excluded != (p < alpha) {
				t.Errorf("s=%v f=%v alpha=%v: CS %v excludes 1/2 = %v but p-value %v", c.s, c.f, alpha, cs, excluded, p)
			}
			if c.s+c.f > 0 && !cs.Contains(c.s/(c.s+c.f)) {
				t.Errorf("s=%v f=%v: CS %v misses the observed share", c.s, c.f, cs)
			}
		}
	}
}

func TestMixtureBadInput(t *testing.T) {
	m := MixtureForMDE(0.02)
	for _, c := range []struct {
		name string
		err  error
	}{
		{"negative count", func() error { _, err := m.PValue(-1, 2); return err }()},
		{"NaN count", func() error { _, err := m.PValue(math.NaN(), 2); return err }()},
		{"p0 of 1", func() error { _, err := m.LogLR(1, 2, 1); return err }()},
		{"zero mixture", func() error { _, err := (Mixture{}).PValue(1, 2); return err }()},
		{"alpha 0", func() error { _, err := m.ConfidenceSequence(1, 2, 0); return err }()},
	} {
		if !errors.Is(c.err, ErrInput) {
			t.Errorf("%s: error = %v, want ErrInput", c.name, c.err)
		}
	}
}

// Seeded Monte Carlo of optional stopping under no difference: 2000
// experiments of 5000 fair coin flips, looked at after every flip. By
// Ville's inequality the mixture test's chance of ever rejecting is at
// most alpha; Monte Carlo slack 0.015 is three standard errors of a
// proportion of 0.05 estimated from 2000 experiments. The naive
// fixed-sample z-test looked at the same way rejects far more often
// (Armitage, McPherson & Rowe, JRSS A 132, 1969, on repeated significance
// tests); asserted to be at least three times alpha.
func TestSequentialFalsePositivesUnderPeeking(t *testing.T) {
	const experiments, looks, alpha, slack = 2000, 5000, 0.05, 0.015
	threshold := math.Log(1 / alpha)
	z := zTwoSided(alpha)
	mixtures := []Mixture{MixtureForMDE(0.02), MixtureForMDE(0.1)}
	r := rand.New(rand.NewPCG(20260301, 4))
	rejected := make([]int, len(mixtures))
	naive := 0
	for range experiments {
		seqs := make([]*sequence, len(mixtures))
		for i, m := range mixtures {
			seqs[i] = newSequence(m)
		}
		done := make([]bool, len(mixtures))
		naiveDone := false
		var bits uint64
		diff := 0
		for i := range looks {
			if i%64 == 0 {
				bits = r.Uint64()
			}
			win := bits&1 == 1
			bits >>= 1
			if win {
				diff++
			} else {
				diff--
			}
			for j, q := range seqs {
				q.add(win)
				if !done[j] && q.logLR >= threshold {
					done[j] = true
					rejected[j]++
				}
			}
			if !naiveDone && math.Abs(float64(diff)) >= z*math.Sqrt(float64(i+1)) {
				naiveDone = true
				naive++
			}
		}
	}
	for j, m := range mixtures {
		rate := float64(rejected[j]) / experiments
		t.Logf("mixture Beta(%.1f, %.1f): false-positive rate %.4f", m.A, m.B, rate)
		if rate > alpha+slack {
			t.Errorf("mixture Beta(%.1f, %.1f) rejected in %.4f of null experiments, want <= %v + %v", m.A, m.B, rate, alpha, slack)
		}
	}
	rate := float64(naive) / experiments
	t.Logf("naive z-test looked at every impression: false-positive rate %.4f", rate)
	if rate < 3*alpha {
		t.Errorf("naive peeking rejected in %.4f of null experiments, want clearly above alpha (>= %v)", rate, 3*alpha)
	}
}

// The confidence sequence covers a true share of 0.6 at every one of 3000
// looks at once in all but at most alpha of 1000 seeded experiments (slack
// 0.02, three standard errors at 1000 experiments).
func TestConfidenceSequenceCoverage(t *testing.T) {
	const experiments, looks, alpha, slack, p = 1000, 3000, 0.05, 0.02, 0.6
	m := MixtureForMDE(0.05)
	r := rand.New(rand.NewPCG(7, 11))
	threshold := math.Log(1 / alpha)
	missed := 0
	for range experiments {
		var s, f float64
		logMarg := 0.0
		for range looks {
			if r.Float64() < p {
				logMarg += math.Log((m.A + s) / (m.A + m.B + s + f))
				s++
			} else {
				logMarg += math.Log((m.B + f) / (m.A + m.B + s + f))
				f++
			}
			// p is outside the sequence when the ratio against p reaches 1/alpha.
			if logMarg-s*math.Log(p)-f*math.Log(1-p) >= threshold {
				missed++
				break
			}
		}
	}
	rate := float64(missed) / experiments
	t.Logf("confidence sequence missed the true share in %.4f of experiments", rate)
	if rate > alpha+slack {
		t.Errorf("confidence sequence missed p = %v in %.4f of experiments, want <= %v + %v", p, rate, alpha, slack)
	}
}
