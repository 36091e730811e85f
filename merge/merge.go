// Package merge holds the interleaving policies that mix an incumbent's and a
// challenger's ranked lists into one, and the credit rule that belongs to each.
//
// Every policy is a pure function of its inputs and a seed: the same lists,
// length and seed always give the same merged list, so any served impression
// can be re-derived for audit. Policies hold no mutable state and are safe for
// concurrent use.
package merge

// Team says which source list contributed a slot of a merged list.
type Team uint8

const (
	// Incumbent marks a slot contributed by the incumbent's list.
	Incumbent Team = 0
	// Challenger marks a slot contributed by the challenger's list.
	Challenger Team = 1
	// Fixed marks a slot placed by a hedge (for example before the first slot
	// the challenger may take); it is served but earns no credit.
	Fixed Team = 2
)

// String returns the team's lower-case name.
func (t Team) String() string {
	switch t {
	case Incumbent:
		return "incumbent"
	case Challenger:
		return "challenger"
	case Fixed:
		return "fixed"
	}
	return "unknown"
}

// Slot is the provenance of one position of a merged list.
type Slot struct {
	// Item is the identity of the element shown at this position.
	Item string
	// Team is the list that contributed the item.
	Team Team
	// RankA and RankB are the item's 1-based ranks in the incumbent's (A) and
	// the challenger's (B) list; 0 means the list does not hold the item.
	RankA, RankB int32
	// PA and PB are, for policies that draw documents from probability
	// distributions (probabilistic), the probability with which list A's and
	// list B's distribution would have drawn this item at this position given
	// the items placed before it. Zero for policies that do not use them.
	PA, PB float32
}

// Click is one weighted user event on a position of a merged list.
type Click struct {
	// Pos is the 0-based position in the merged list.
	Pos int
	// Weight is the event's weight (event type weight times any position
	// debiasing factor); it is positive.
	Weight float64
}

// Score is the credit each side earned on one impression.
type Score struct {
	Incumbent, Challenger float64
}

// Outcome is an impression's result once its feedback is in.
type Outcome uint8

const (
	// NoFeedback means the impression received no credited event.
	NoFeedback Outcome = 0
	// IncumbentWin means the incumbent earned more credit.
	IncumbentWin Outcome = 1
	// ChallengerWin means the challenger earned more credit.
	ChallengerWin Outcome = 2
	// Tie means both earned equal, non-zero credit, or events arrived
	// that credited neither side.
	Tie Outcome = 3
)

// String returns the outcome's name as used in metrics and reports.
func (o Outcome) String() string {
	switch o {
	case IncumbentWin:
		return "incumbent"
	case ChallengerWin:
		return "challenger"
	case Tie:
		return "tie"
	}
	return "none"
}

// Policy is an interleaving method with its credit rule.
type Policy interface {
	// Name returns the policy's configuration name, e.g. "team-draft".
	Name() string
	// Interleave merges a (incumbent) and b (challenger), both ranked lists
	// of distinct item identities, into at most n slots, appending them to
	// dst[:0] and returning it. All random choices come from seed.
	// When one list runs out the other fills the rest.
	Interleave(dst []Slot, a, b []string, n int, seed uint64) []Slot
	// Credit scores the clicks observed on a merged list under the policy's
	// published credit rule.
	Credit(slots []Slot, clicks []Click) Score
}

// Decide turns a score into an outcome; hadEvents says whether any event
// was recorded for the impression at all.
func Decide(s Score, hadEvents bool) Outcome {
	switch {
	case !hadEvents:
		return NoFeedback
	case s.Challenger > s.Incumbent:
		return ChallengerWin
	case s.Incumbent > s.Challenger:
		return IncumbentWin
	}
	return Tie
}

// Decider is implemented by a policy whose Score is not a tally but the
// probability of each side winning; it turns a score into an outcome
// itself, with randomness from the impression's seed so the outcome can be
// re-derived.
type Decider interface {
	Decide(s Score, hadEvents bool, seed uint64) Outcome
}

// DecideFor returns the outcome of an impression scored s under policy p:
// p's own Decide when it is a Decider, else Decide.
func DecideFor(p Policy, s Score, hadEvents bool, seed uint64) Outcome {
	if d, ok := p.(Decider); ok {
		return d.Decide(s, hadEvents, seed)
	}
	return Decide(s, hadEvents)
}
