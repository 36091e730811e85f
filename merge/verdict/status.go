package verdict

import (
	"fmt"
	"math"

	"riffle/merge"
)

// Verdict is the decision on an experiment.
type Verdict string

// The four verdicts; see the package documentation for the rule.
const (
	ChallengerBetter Verdict = "challenger-better"
	IncumbentBetter  Verdict = "incumbent-better"
	OnPar            Verdict = "on-par"
	Undecided        Verdict = "undecided"
)

// Wins counts the impressions each side won, and the ties.
type Wins struct {
	Incumbent  int64 `json:"incumbent"`
	Challenger int64 `json:"challenger"`
	Tie        int64 `json:"tie"`
}

// Status is an experiment's statistics and verdict. Its first fourteen
// fields are the experiment status of the admin API and of riffle report
// --format json; the rest are riffle's own additions.
type Status struct {
	Experiment string `json:"experiment"`
	Policy     string `json:"policy"`
	// Ramp is the share of users getting interleaved lists, as the caller
	// knows it; null when unknown (riffle report over store files).
	Ramp         *float64 `json:"ramp"`
	Impressions  int64    `json:"impressions"`
	Interleaved  int64    `json:"interleaved"`
	WithFeedback int64    `json:"with_feedback"`
	Wins         Wins     `json:"wins"`
	// Delta is (W + T/2)/n - 0.5; 0 with no feedback.
	Delta float64 `json:"delta"`
	// CI is the fixed-sample interval for Delta at 1 - alpha, variance
	// clustered by user.
	CI Interval `json:"ci"`
	// PValue is the always-valid p-value of the mixture test: safe to watch.
	PValue  float64 `json:"p_value"`
	Verdict Verdict `json:"verdict"`
	// Needed is how many more impressions with feedback the always-valid
	// test needs for the planned power at the MDE; 0 once decided.
	Needed int64 `json:"needed"`
	// ETA is when Needed will have arrived at the recent rate, as a Go
	// duration string; null when the rate is unknown.
	ETA *Duration `json:"eta"`

	// Reason says why the verdict is what it is.
	Reason string  `json:"reason"`
	Alpha  float64 `json:"alpha"`
	Power  float64 `json:"power"`
	MDE    float64 `json:"mde"`
	Margin float64 `json:"margin"`
	// NoFeedback counts finalised interleaved impressions without feedback.
	NoFeedback int64 `json:"no_feedback"`
	// Users counts users with feedback (impressions without a user key
	// count one each).
	Users int64 `json:"users"`
	// DesignEffect is the clustered variance of Delta over its variance as
	// if impressions were independent.
	DesignEffect float64 `json:"design_effect"`
	// WinShare is W/(W+L), ties set aside; 0.5 with no decisive impression.
	WinShare float64 `json:"win_share"`
	// Wilson is the fixed-sample Wilson interval for WinShare.
	Wilson Interval `json:"wilson"`
	// CS is the always-valid confidence sequence for WinShare at 1 - alpha,
	// the interval matching PValue.
	CS Interval `json:"cs"`
	// CSDelta is the always-valid interval for Delta the verdict uses.
	CSDelta Interval `json:"cs_delta"`
	// NonInferior ("on par or better") says CSDelta's lower end is above
	// -Margin.
	NonInferior bool `json:"non_inferior"`
	// SignTest is the fixed-sample exact sign test, ties set aside.
	SignTest SignTest `json:"sign_test"`
	// NeededFixed is Needed for a fixed-sample test at one look.
	NeededFixed int64 `json:"needed_fixed"`
}

// Compute returns the status of the experiment described by in. Bad counts
// or parameters give an error wrapping ErrInput.
func Compute(in Input) (Status, error) {
	p, err := in.Params.withDefaults()
	if err != nil {
		return Status{}, err
	}
	if err := in.check(); err != nil {
		return Status{}, err
	}
	cl, err := cluster(in.Outcomes, in.Users)
	if err != nil {
		return Status{}, err
	}
	o := in.Outcomes
	s := Status{
		Experiment: in.Experiment, Policy: in.Policy, Ramp: in.Ramp,
		Impressions: in.Impressions, Interleaved: in.Interleaved,
		Wins:  Wins{Incumbent: o[merge.IncumbentWin], Challenger: o[merge.ChallengerWin], Tie: o[merge.Tie]},
		Alpha: p.Alpha, Power: p.Power, MDE: p.MDE, Margin: p.Margin,
		NoFeedback: o[merge.NoFeedback], Users: cl.users, DesignEffect: cl.designEffect(),
	}
	s.WithFeedback = s.Wins.Incumbent + s.Wins.Challenger + s.Wins.Tie
	if err := s.fixedSample(); err != nil {
		return Status{}, err
	}
	if err := s.sequential(); err != nil {
		return Status{}, err
	}
	s.Verdict, s.Reason = s.decide()
	if err := s.planRest(); err != nil {
		return Status{}, err
	}
	s.ETA = etaFor(s.Needed, &in)
	if !s.isFinite() {
		return Status{}, fmt.Errorf("%w: counts too large to compute with (%d with feedback)", ErrInput, s.WithFeedback)
	}
	return s, nil
}

// effective returns the count c over the design effect floored at 1.
func (s *Status) effective(c int64) float64 {
	return float64(c) / max(1, s.DesignEffect)
}

// fixedSample fills Delta, CI, WinShare, Wilson and SignTest.
func (s *Status) fixedSample() error {
	w, l, t := s.Wins.Challenger, s.Wins.Incumbent, s.Wins.Tie
	n := float64(s.WithFeedback)
	s.CI = Interval{-0.5, 0.5}
	if n > 0 {
		r := (float64(w) + float64(t)/2) / n
		s.Delta = r - 0.5
		ci := preferenceInterval(r, float64(t)/n, n, max(1, s.DesignEffect), zTwoSided(s.Alpha))
		s.CI = Interval{ci[0] - 0.5, ci[1] - 0.5}
	}
	s.WinShare = 0.5
	if w+l > 0 {
		s.WinShare = float64(w) / float64(w+l)
	}
	var err error
	if s.Wilson, err = Wilson(s.effective(w), s.effective(w+l), s.Alpha); err != nil {
		return err
	}
	pv, err := SignTestPValue(w, l)
	if err != nil {
		return err
	}
	s.SignTest = SignTest{PValue: pv, Challenger: w, Incumbent: l, TiesSetAside: t}
	return nil
}

// sequential fills PValue, CS, CSDelta and NonInferior.
func (s *Status) sequential() error {
	mix := MixtureForMDE(s.MDE)
	w, l := s.effective(s.Wins.Challenger), s.effective(s.Wins.Incumbent)
	var err error
	if s.PValue, err = mix.PValue(w, l); err != nil {
		return err
	}
	if s.CS, err = mix.ConfidenceSequence(w, l, s.Alpha); err != nil {
		return err
	}
	share, err := mix.ConfidenceSequence(w, l, s.Alpha/2)
	if err != nil {
		return err
	}
	decisive, err := Mixture{A: 1, B: 1}.ConfidenceSequence(w+l, s.effective(s.Wins.Tie), s.Alpha/2)
	if err != nil {
		return err
	}
	s.CSDelta = deltaBounds(share, decisive)
	s.NonInferior = s.WithFeedback > 0 && s.CSDelta[0] > -s.Margin
	return nil
}

// deltaBounds returns the range of Delta = q (p - 1/2) over p in share and
// q in decisive.
func deltaBounds(share, decisive Interval) Interval {
	ends := func(p float64) (float64, float64) {
		a, b := decisive[0]*(p-0.5), decisive[1]*(p-0.5)
		return min(a, b), max(a, b)
	}
	lo, _ := ends(share[0])
	_, hi := ends(share[1])
	return Interval{lo, hi}
}

// decide applies the verdict rule of the package documentation.
func (s *Status) decide() (Verdict, string) {
	if s.WithFeedback == 0 {
		return Undecided, "no impressions with feedback yet"
	}
	significant := s.PValue < s.Alpha
	leader := "challenger"
	if s.Wins.Incumbent > s.Wins.Challenger {
		leader = "incumbent"
	}
	m := s.Margin
	if m > 0 && s.CSDelta[0] > -m && s.CSDelta[1] < m {
		why := fmt.Sprintf("Delta's always-valid interval [%.4f, %.4f] lies within the margin (-%.4f, +%.4f)",
			s.CSDelta[0], s.CSDelta[1], m, m)
		if significant {
			why += fmt.Sprintf("; the %s is significantly ahead, but by less than the margin", leader)
		}
		return OnPar, why
	}
	if significant && s.Wins.Challenger != s.Wins.Incumbent {
		v := ChallengerBetter
		if leader == "incumbent" {
			v = IncumbentBetter
		}
		return v, fmt.Sprintf("the always-valid test rejects no difference (p = %.3g < alpha %.3g): the %s won %d impressions, the other side %d",
			s.PValue, s.Alpha, leader, max(s.Wins.Challenger, s.Wins.Incumbent), min(s.Wins.Challenger, s.Wins.Incumbent))
	}
	why := fmt.Sprintf("the always-valid test cannot yet tell the two apart (p = %.3g, alpha %.3g)", s.PValue, s.Alpha)
	if m > 0 && s.NonInferior {
		why += fmt.Sprintf("; on par or better so far (Delta's always-valid lower end %.4f is above -%.4f)", s.CSDelta[0], m)
	}
	if s.CI[0] > 0 || s.CI[1] < 0 {
		why += "; the fixed-sample interval excludes 0, but is not safe to act on when looked at repeatedly"
	}
	return Undecided, why
}

// planRest fills Needed and NeededFixed and, while undecided, adds the
// number to the reason.
func (s *Status) planRest() error {
	fixed, err := SampleSize(s.Alpha, s.Power, s.MDE)
	if err != nil {
		return err
	}
	seq, err := SequentialSampleSize(s.Alpha, s.Power, s.MDE)
	if err != nil {
		return err
	}
	d := max(1, s.DesignEffect)
	rest := func(total int64) int64 {
		return max(0, ceilCount(float64(total)*d)-s.WithFeedback)
	}
	s.NeededFixed, s.Needed = rest(fixed), rest(seq)
	if s.Verdict != Undecided {
		s.Needed, s.NeededFixed = 0, 0
		return nil
	}
	if s.Needed > 0 {
		s.Reason += fmt.Sprintf("; about %d more impressions with feedback needed for power %.2g at Delta %.3g", s.Needed, s.Power, s.MDE)
	} else {
		s.Reason += fmt.Sprintf("; the planned sample for power %.2g at Delta %.3g is reached, so any difference is likely smaller than that", s.Power, s.MDE)
	}
	return nil
}

// isFinite reports whether every float of the status is finite, so that it
// marshals to JSON.
func (s *Status) isFinite() bool {
	for _, v := range []float64{s.Delta, s.CI[0], s.CI[1], s.PValue, s.DesignEffect, s.WinShare,
		s.Wilson[0], s.Wilson[1], s.CS[0], s.CS[1], s.CSDelta[0], s.CSDelta[1], s.SignTest.PValue} {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return false
		}
	}
	return true
}
