package verdict

import (
	"fmt"
	"math"
	"time"

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
	// PValue is the running always-valid p-value: the smallest alpha at
	// which the running interval CSDelta excludes 0. It only falls, and is
	// safe to watch.
	PValue float64 `json:"p_value"`
	// Verdict is the decision once made (see Decided), else undecided.
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
	// CS is the always-valid confidence sequence for WinShare at 1 - alpha
	// at this look (ties set aside, clustered by user like CSDelta); the
	// verdict does not use it.
	CS Interval `json:"cs"`
	// CSDelta is the running always-valid interval for Delta at
	// 1 - alpha, the one the verdict uses: the intersection over looks.
	CSDelta Interval `json:"cs_delta"`
	// NonInferior ("on par or better") says CSDelta's lower end is above
	// -Margin.
	NonInferior bool `json:"non_inferior"`
	// SignTest is the fixed-sample exact sign test on users, each counted
	// once for the side that won more of their impressions.
	SignTest SignTest `json:"sign_test"`
	// NeededFixed is Needed for a fixed-sample test at one look.
	NeededFixed int64 `json:"needed_fixed"`
	// Decided is the record of the look at which the verdict first left
	// undecided; null until then.
	Decided *Decision `json:"decided"`
	// Current is this look's evidence on its own.
	Current Evidence `json:"current"`
	// Running is the state to keep and pass back in the next look's
	// Input.Running.
	Running Running `json:"-"`
}

// Compute returns the status of the experiment described by in, one look
// after in.Running. Bad counts or parameters give an error wrapping
// ErrInput.
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
	if err := s.fixedSample(&cl); err != nil {
		return Status{}, err
	}
	if err := s.sequential(&cl, p, in.Running); err != nil {
		return Status{}, err
	}
	s.Verdict, s.Reason = s.decide(in.Now, in.ConfigHash)
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
func (s *Status) fixedSample(cl *clustering) error {
	w, l, t := s.Wins.Challenger, s.Wins.Incumbent, s.Wins.Tie
	n := float64(s.WithFeedback)
	if n > 0 {
		s.Delta = (float64(w)+float64(t)/2)/n - 0.5
	}
	ci := preferenceInterval(float64(w), float64(l), float64(t), max(1, s.DesignEffect), zTwoSided(s.Alpha))
	s.CI = Interval{ci[0] - 0.5, ci[1] - 0.5}
	s.WinShare = 0.5
	if w+l > 0 {
		s.WinShare = float64(w) / float64(w+l)
	}
	var err error
	if s.Wilson, err = Wilson(s.effective(w), s.effective(w+l), s.Alpha); err != nil {
		return err
	}
	ahead, behind, even := cl.signs[2], cl.signs[0], cl.signs[1]
	pv, err := SignTestPValue(ahead, behind)
	if err != nil {
		return err
	}
	s.SignTest = SignTest{PValue: pv, Challenger: ahead, Incumbent: behind, TiesSetAside: even, Unit: "users"}
	return nil
}

// sequential fills PValue, CS, CSDelta, NonInferior, Current and Running
// from this look and the running state before it.
func (s *Status) sequential(cl *clustering, p Params, before Running) error {
	mix, err := planMixture(p.Alpha, p.Power, p.MDE)
	if err != nil {
		return err
	}
	now := look{mix: mix, byUser: cl.byUser, naive: cl.single}
	iv := now.interval(p.Alpha)
	s.Current = Evidence{
		WithFeedback: s.WithFeedback, Users: s.Users, Delta: s.Delta,
		PValue: now.pValue(), CSDelta: Interval{iv[0] - 0.5, iv[1] - 0.5},
	}
	dec := look{mix: mix, byUser: cl.decisive, naive: cl.decided1}
	s.CS = dec.interval(p.Alpha)
	s.Running = before
	if s.WithFeedback > 0 {
		s.Running = before.fold(s.Current.CSDelta, s.Current.PValue, p)
	}
	s.CSDelta, s.PValue = Interval{-0.5, 0.5}, 1
	if s.Running.Looks > 0 {
		s.CSDelta, s.PValue = s.Running.CSDelta, s.Running.PValue
	}
	s.NonInferior = s.WithFeedback > 0 && s.CSDelta[0] > -s.Margin
	s.Current.Verdict = rule(s.CSDelta, s.Margin)
	return nil
}

// decide applies the verdict rule: the decision already made stands;
// else the rule on the running interval, recorded as the decision when it
// is not undecided.
func (s *Status) decide(now time.Time, hash string) (Verdict, string) {
	if d := s.Running.Decided; d != nil {
		s.Decided = d
		why := fmt.Sprintf("decided %s at %s after %d impressions with feedback (Delta's always-valid interval was [%.4f, %.4f], p = %.3g); a decision is kept",
			d.Verdict, d.Time.UTC().Format(time.RFC3339), d.WithFeedback, d.CSDelta[0], d.CSDelta[1], d.PValue)
		if s.Current.Verdict != d.Verdict && s.Current.Verdict != Undecided {
			why += fmt.Sprintf("; the evidence now also says %s", s.Current.Verdict)
		}
		return d.Verdict, why
	}
	if s.WithFeedback == 0 {
		return Undecided, "no impressions with feedback yet"
	}
	v := s.Current.Verdict
	if v == Undecided {
		return v, s.undecidedReason()
	}
	d := &Decision{
		Verdict: v, Time: now, WithFeedback: s.WithFeedback, Users: s.Users,
		Delta: s.Delta, PValue: s.PValue, CSDelta: s.CSDelta, ConfigHash: hash,
	}
	s.Running.Decided, s.Decided = d, d
	return v, s.decidedReason(v)
}

// decidedReason says why the rule gave v at this look.
func (s *Status) decidedReason(v Verdict) string {
	iv, m := s.CSDelta, s.Margin
	switch v {
	case ChallengerBetter:
		return fmt.Sprintf("Delta's always-valid interval [%.4f, %.4f] lies above 0 (p = %.3g <= alpha %.3g)", iv[0], iv[1], s.PValue, s.Alpha)
	case IncumbentBetter:
		return fmt.Sprintf("Delta's always-valid interval [%.4f, %.4f] lies below 0: the incumbent won %d impressions, the challenger %d (p = %.3g <= alpha %.3g)",
			iv[0], iv[1], s.Wins.Incumbent, s.Wins.Challenger, s.PValue, s.Alpha)
	}
	return fmt.Sprintf("Delta's always-valid interval [%.4f, %.4f] lies within the margin (-%.4f, +%.4f)", iv[0], iv[1], m, m)
}

// undecidedReason says why there is no verdict yet.
func (s *Status) undecidedReason() string {
	iv, m := s.CSDelta, s.Margin
	why := fmt.Sprintf("the always-valid test cannot yet tell the two apart: Delta's interval [%.4f, %.4f] holds 0 (p = %.3g, alpha %.3g)", iv[0], iv[1], s.PValue, s.Alpha)
	if m > 0 && s.NonInferior {
		why += fmt.Sprintf("; on par or better so far (Delta's always-valid lower end %.4f is above -%.4f)", iv[0], m)
	}
	if s.CI[0] > 0 || s.CI[1] < 0 {
		why += "; the fixed-sample interval excludes 0, but is not safe to act on when looked at repeatedly"
	}
	return why
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
		return max(0, CeilCount(float64(total)*d)-s.WithFeedback)
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
		s.Wilson[0], s.Wilson[1], s.CS[0], s.CS[1], s.CSDelta[0], s.CSDelta[1], s.SignTest.PValue,
		s.Current.PValue, s.Current.CSDelta[0], s.Current.CSDelta[1]} {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return false
		}
	}
	return true
}
