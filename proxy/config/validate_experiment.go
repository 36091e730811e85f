package config

import (
	"fmt"
	"math"
	"sort"
	"strings"
)

func (k *checker) experiment(e *Experiment, c *Config) {
	k.name("experiment.name", e.Name)
	k.oneOf("experiment.policy", e.Policy, "balanced", "team-draft", "probabilistic", "optimized")
	k.oneOf("experiment.credit", e.Credit, "linear", "inverse-rank")
	k.above("experiment.tau", e.Tau, 0)
	if e.KeepRequestBytes < 0 {
		k.add("experiment.keep_request_bytes", "%d is negative; it bounds a kept request's size", e.KeepRequestBytes)
	}
	for i, h := range e.KeepHeaders {
		if !validHeaderName(h) {
			k.add(fmt.Sprintf("experiment.keep_headers[%d]", i), "%q is not a header field name (RFC 9110 section 5.1)", h)
		}
	}
	if e.Ramp != nil {
		k.unit("experiment.ramp", *e.Ramp)
	}
	k.schedule(e.Schedule)
	k.hedges(e, c.Routes)
	k.positiveDuration("experiment.window", e.Window)
	k.events(e.Events)
	k.atLeast("experiment.debias.eta", e.Debias.Eta, 0)
	k.open("experiment.alpha", e.Alpha, 0, 1)
	k.open("experiment.power", e.Power, 0, 1)
	k.open("experiment.mde", e.MDE, 0, 0.5)
	if !(e.Margin >= 0 && e.Margin < 0.5) {
		k.add("experiment.margin", "%g is outside [0, 0.5)", e.Margin)
	}
	k.guardrails(e.Guardrails, c.Challenger)
}

// name checks an identifier used in store keys, metric labels and feedback
// events: 1 to 64 letters, digits, '.', '_' or '-', starting with a letter
// or digit (common practice for label-safe names).
func (k *checker) name(path, s string) {
	if s == "" {
		k.add(path, "is required")
		return
	}
	if len(s) > 64 {
		k.add(path, "%q is longer than 64 characters", s)
		return
	}
	for i, r := range s {
		word := r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9'
		if !word && (i == 0 || (r != '.' && r != '_' && r != '-')) {
			k.add(path, "%q may hold only letters, digits, '.', '_' and '-', and must start with a letter or digit", s)
			return
		}
	}
}

func (k *checker) schedule(stages []Stage) {
	for i, s := range stages {
		p := fmt.Sprintf("experiment.schedule[%d]", i)
		if s.After < 0 {
			k.add(p+".after", "%s is negative; stages count from the experiment's start", dur(s.After))
		} else if i > 0 && s.After <= stages[i-1].After {
			k.add(p+".after", "%s is not later than the previous stage's %s; list stages in increasing order", dur(s.After), dur(stages[i-1].After))
		}
		k.unit(p+".ramp", s.Ramp)
	}
}

func (k *checker) hedges(e *Experiment, routes []Route) {
	if e.MaxChallengerSlots < 0 {
		k.add("experiment.max_challenger_slots", "%d is negative; use 0 for no cap", e.MaxChallengerSlots)
	}
	if e.ChallengerFromSlot < 0 {
		k.add("experiment.challenger_from_slot", "%d is negative; slots count from 1", e.ChallengerFromSlot)
	}
	for i, r := range routes {
		if r.Slots > 0 && e.ChallengerFromSlot > r.Slots {
			k.add("experiment.challenger_from_slot", "%d is past routes[%d].slots (%d), so the challenger would never be shown there", e.ChallengerFromSlot, i, r.Slots)
		}
	}
}

func (k *checker) events(events map[string]float64) {
	names := make([]string, 0, len(events))
	for n := range events {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		p := join("experiment.events", n)
		if n == "" {
			k.add(p, "an event name may not be empty")
		} else {
			k.name(p, n)
		}
		if w := events[n]; !(w > 0) || math.IsInf(w, 0) {
			k.add(p, "weight %g must be a positive number", w)
		}
	}
}

func (k *checker) guardrails(g Guardrails, challenger Backend) {
	const p = "experiment.guardrails."
	if !(g.ErrorRate >= 0 && g.ErrorRate < 1) {
		k.add(p+"error_rate", "%g is outside [0, 1); use 0 to turn the guard off", g.ErrorRate)
	}
	switch {
	case g.LatencyP99 < 0:
		k.add(p+"latency_p99", "%s is negative; use 0 to turn the guard off", dur(g.LatencyP99))
	case g.LatencyP99 > 0 && challenger.Timeout > 0 && g.LatencyP99 >= challenger.Timeout:
		k.add(p+"latency_p99", "%s is not below challenger.timeout (%s), so it could never trip", dur(g.LatencyP99), dur(challenger.Timeout))
	}
	k.positiveDuration(p+"window", g.Window)
	k.positive(p+"min_requests", int64(g.MinRequests))
}

// unit checks a share in [0, 1].
func (k *checker) unit(path string, v float64) {
	if !(v >= 0 && v <= 1) {
		k.add(path, "%g is outside [0, 1]", v)
	}
}

// open checks lo < v < hi.
func (k *checker) open(path string, v, lo, hi float64) {
	if !(v > lo && v < hi) {
		k.add(path, "%g is outside (%g, %g)", v, lo, hi)
	}
}

// above checks a finite v > lo.
func (k *checker) above(path string, v, lo float64) {
	if !(v > lo) || math.IsInf(v, 0) {
		k.add(path, "%g must be a finite number above %g", v, lo)
	}
}

// atLeast checks a finite v >= lo.
func (k *checker) atLeast(path string, v, lo float64) {
	if !(v >= lo) || math.IsInf(v, 0) {
		k.add(path, "%g must be a finite number of at least %g", v, lo)
	}
}

// validHeaderName reports whether h is an RFC 9110 field name: a token of
// letters, digits and !#$%&'*+-.^_`|~.
func validHeaderName(h string) bool {
	if h == "" {
		return false
	}
	for _, c := range []byte(h) {
		ok := c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || strings.IndexByte("!#$%&'*+-.^_`|~", c) >= 0
		if !ok {
			return false
		}
	}
	return true
}
