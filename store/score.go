package store

import (
	"fmt"

	"riffle/merge"
)

// Scorer turns an impression and its events into its outcome under one
// set of rules, resolving each policy once. Every store finalises through
// it, so the credit is computed by the same code whichever holds the
// data. A Scorer is not safe for concurrent use; make one per pass.
type Scorer struct {
	rules    *Rules
	policies map[string]merge.Policy
}

// NewScorer returns a Scorer for r (defaults applied).
func NewScorer(r Rules) (*Scorer, error) {
	r, err := r.withDefaults()
	if err != nil {
		return nil, err
	}
	return &Scorer{rules: &r, policies: make(map[string]merge.Policy)}, nil
}

func newScorer(r *Rules) *Scorer { return &Scorer{rules: r, policies: make(map[string]merge.Policy)} }

// Score scores an interleaved impression's events with its policy's
// Credit (each event weighted by its type's weight and, with Rules.Eta,
// the debiasing weight of its 1-based slot) and decides the outcome. An
// event whose type weighs 0 (or was dropped from the rules since it was
// accepted) is no click, so it cannot move balanced's k, but it still
// makes the impression one with feedback. An error wrapping ErrCorrupt (an
// event on an item the impression did not show) or ErrUnknownPolicy means
// the impression cannot be finalised and should be set aside.
func (s *Scorer) Score(im *Impression, evs []Event) (merge.Score, merge.Outcome, error) {
	var clicks []merge.Click
	for _, ev := range evs {
		pos := slotOf(im.Slots, ev.Item)
		if pos < 0 {
			return merge.Score{}, 0, fmt.Errorf("event on %s names item %q not in the impression: %w", im.ID, ev.Item, ErrCorrupt)
		}
		if w := s.rules.Events[ev.Type] * merge.DebiasWeight(pos+1, s.rules.Eta); w > 0 {
			clicks = append(clicks, merge.Click{Pos: pos, Weight: w})
		}
	}
	p, err := s.policy(im.Policy)
	if err != nil {
		return merge.Score{}, 0, fmt.Errorf("impression %s: %w", im.ID, err)
	}
	score := p.Credit(im.Slots, clicks)
	return score, merge.DecideFor(p, score, len(evs) > 0, im.Seed), nil
}

func (s *Scorer) policy(name string) (merge.Policy, error) {
	if p, ok := s.policies[name]; ok {
		return p, nil
	}
	p, err := s.rules.Policy(name)
	if err != nil {
		return nil, fmt.Errorf("resolve policy %q: %w: %w", name, ErrUnknownPolicy, err)
	}
	s.policies[name] = p
	return p, nil
}
