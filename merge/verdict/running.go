package verdict

import (
	"fmt"
	"time"
)

// Running is what the verdict carries from one look to the next: the
// running intersection of Delta's confidence sequence and the least
// p-value so far, and the decision once made. The running intersection of
// a confidence sequence is itself one (Howard, Ramdas, McAuliffe &
// Sekhon, Annals of Statistics 49(2), 2021, section 2), so the interval
// only shrinks, the p-value only falls and a verdict, once reached, is
// kept. The caller keeps it (the store persists it) and passes it back in
// Input.Running; the zero Running means no look yet.
type Running struct {
	// Alpha, Power and MDE are the settings the sequence was built with
	// (the MDE and power tune its mixture). A look under other settings
	// starts the interval and p-value afresh; the decision stays.
	Alpha, Power, MDE float64
	// Looks counts the looks folded in; 0 means none.
	Looks int64
	// CSDelta is the intersection over the looks of Delta's always-valid
	// interval.
	CSDelta Interval
	// PValue is the least always-valid p-value over the looks: the
	// smallest alpha at which the running interval excludes 0.
	PValue float64
	// Decided is the decision, recorded at the first look whose verdict
	// was not undecided; nil until then.
	Decided *Decision
}

// Decision is the record of the look at which the verdict first left
// undecided.
type Decision struct {
	Verdict Verdict   `json:"verdict"`
	Time    time.Time `json:"time"`
	// WithFeedback and Users are the impressions with feedback and the
	// users behind them at that look.
	WithFeedback int64 `json:"with_feedback"`
	Users        int64 `json:"users"`
	// Delta, PValue and CSDelta are the evidence at that look: the point
	// estimate, the running p-value and the running interval.
	Delta   float64  `json:"delta"`
	PValue  float64  `json:"p_value"`
	CSDelta Interval `json:"cs_delta"`
	// ConfigHash is the hash of the config in force, as the caller gave it.
	ConfigHash string `json:"config_hash"`
}

// Evidence is the always-valid evidence of one look on its own, beside
// the running values of Status.
type Evidence struct {
	WithFeedback int64   `json:"with_feedback"`
	Users        int64   `json:"users"`
	Delta        float64 `json:"delta"`
	// PValue and CSDelta are this look's, neither minimised nor
	// intersected over earlier looks.
	PValue  float64  `json:"p_value"`
	CSDelta Interval `json:"cs_delta"`
	// Verdict is what the rule says of the running interval now; it may
	// differ from a decision already made (on-par first, then ahead).
	Verdict Verdict `json:"verdict"`
}

// rule is the verdict of a running interval iv for Delta with margin m,
// in fixed precedence: ahead of 0 beats within the margin, so that a
// significant difference is never overridden by on-par.
//
//	lower end > 0                      challenger-better
//	upper end < 0                      incumbent-better
//	m > 0, -m < lower, upper < +m      on-par
//	otherwise                          undecided
func rule(iv Interval, m float64) Verdict {
	switch {
	case iv[0] > 0:
		return ChallengerBetter
	case iv[1] < 0:
		return IncumbentBetter
	case m > 0 && iv[0] > -m && iv[1] < m:
		return OnPar
	}
	return Undecided
}

// sameSettings reports whether r was built with p's sequence settings.
func (r Running) sameSettings(p Params) bool {
	return r.Alpha == p.Alpha && r.Power == p.Power && r.MDE == p.MDE
}

// fold returns r after one more look with interval iv and p-value pv
// under settings p.
func (r Running) fold(iv Interval, pv float64, p Params) Running {
	if r.Looks == 0 || !r.sameSettings(p) {
		return Running{Alpha: p.Alpha, Power: p.Power, MDE: p.MDE, Looks: 1, CSDelta: iv, PValue: pv, Decided: r.Decided}
	}
	r.Looks++
	r.CSDelta = Interval{max(r.CSDelta[0], iv[0]), min(r.CSDelta[1], iv[1])}
	if r.CSDelta[0] > r.CSDelta[1] {
		// The sequence has failed to cover (probability at most alpha):
		// show the point where its ends met rather than an empty set.
		mid := (r.CSDelta[0] + r.CSDelta[1]) / 2
		r.CSDelta = Interval{mid, mid}
	}
	r.PValue = min(r.PValue, pv)
	return r
}

// check validates a Running handed back by a caller.
func (r Running) check() error {
	if r.Looks < 0 {
		return fmt.Errorf("%w: running looks %d: counts must be >= 0", ErrInput, r.Looks)
	}
	if r.Looks > 0 && !(r.CSDelta[0] >= -0.5 && r.CSDelta[0] <= r.CSDelta[1] && r.CSDelta[1] <= 0.5 && r.PValue >= 0 && r.PValue <= 1) {
		return fmt.Errorf("%w: running interval %v with p-value %v: want -0.5 <= lo <= hi <= 0.5 and p in [0, 1]", ErrInput, r.CSDelta, r.PValue)
	}
	return nil
}
