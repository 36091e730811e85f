package store

import (
	"time"

	"riffle/merge"
)

// Impression is the provenance record of one served response of a
// configured route: what was shown, to whom (hashed), and which list
// supplied every slot.
type Impression struct {
	// ID is the impression's time-sortable unique id.
	ID ID
	// Time is when the impression was served.
	Time time.Time
	// Experiment is the experiment's name.
	Experiment string
	// User is the hashed user key (see HashUser); 0 when the request had none.
	User uint64
	// Policy is the interleaving policy's name; empty for incumbent-only.
	Policy string
	// Seed is the seed the policy's random choices came from.
	Seed uint64
	// Slots is the merged list's provenance, one entry per position. For an
	// incumbent-only impression every slot has Team merge.Incumbent.
	Slots []merge.Slot
	// Fallback is empty for an interleaved impression; otherwise it says why
	// the incumbent alone was served ("ramp", "challenger-timeout",
	// "challenger-status", "challenger-body", "challenger-connect",
	// "challenger-empty", "guardrail", ...).
	Fallback string
	// Request is the request that produced an interleaved impression, when
	// the experiment keeps requests; nil otherwise.
	Request *Request
}

// Interleaved reports whether the impression showed a merged list.
func (im *Impression) Interleaved() bool { return im.Fallback == "" }

// Request is what it takes to ask another model the question an
// interleaved impression answered: kept only with experiment.keep_requests,
// and deleted with the impression by store_retention.
type Request struct {
	// Route is the route's configured path pattern.
	Route string
	// Method, Path and Query are the request line's (Query without "?").
	Method, Path, Query string
	// Header holds the kept request header fields as name, value pairs.
	Header [][2]string
	// Body is the request body.
	Body []byte
	// Lengths are the numbers of distinct items in the incumbent's and the
	// challenger's lists, which the probability of the shown list depends
	// on once one of them has nothing left to draw.
	Lengths [2]int32
}
