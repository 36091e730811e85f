package proxy

// outcome is how a route request ended, as the requests metric's outcome.
type outcome uint8

const (
	// outInterleaved: the merged list was served.
	outInterleaved outcome = iota
	// outIncumbentOnly: the incumbent's response was served as it came.
	outIncumbentOnly
	// outChallengerOnly: the incumbent failed and on_incumbent_failure is
	// serve-challenger, so the challenger's response was served.
	outChallengerOnly
	// outFailed: riffle answered with an error status of its own.
	outFailed
	numOutcomes
)

func (o outcome) String() string {
	return [numOutcomes]string{"interleaved", "incumbent-only", "challenger-only", "failed"}[o]
}

// reason says why a request was not interleaved. Its text is the
// impression's Fallback and the requests metric's reason.
type reason uint8

const (
	reasonNone reason = iota
	reasonRamp
	reasonGuardrail
	reasonChallengerTimeout
	reasonChallengerConnect
	reasonChallengerStatus
	reasonChallengerBody
	reasonChallengerEmpty
	reasonIncumbentTimeout
	reasonIncumbentConnect
	reasonIncumbentStatus
	reasonIncumbentBody
	reasonIncumbentEmpty
	reasonRequestTooLarge
	reasonRequestBody
	reasonMerge
	reasonClientGone
	reasonRequestTimeout
	numReasons
)

func (r reason) String() string {
	return [numReasons]string{
		"", "ramp", "guardrail",
		"challenger-timeout", "challenger-connect", "challenger-status", "challenger-body", "challenger-empty",
		"incumbent-timeout", "incumbent-connect", "incumbent-status", "incumbent-body",
		"incumbent-empty", "request-too-large", "request-body", "merge", "client-gone",
		"request-timeout",
	}[r]
}

// label is the reason as a metric label value: "none" for no reason.
func (r reason) label() string {
	if r == reasonNone {
		return "none"
	}
	return r.String()
}

// failureReason turns a failed call's kind into the reason for the
// backend, challenger or incumbent.
func failureReason(k failKind, challenger bool) reason {
	base := reasonIncumbentTimeout
	if challenger {
		base = reasonChallengerTimeout
	}
	switch k {
	case kindCanceled:
		return reasonClientGone
	case kindConnect:
		return base + 1
	case kindStatus:
		return base + 2
	case kindBody:
		return base + 3
	}
	return base
}

// outcomePairs lists every (outcome, reason) a route request can end in,
// so that each series of the requests metric exists from the start.
func outcomePairs() [][2]uint8 {
	var pairs [][2]uint8
	add := func(o outcome, rs ...reason) {
		for _, r := range rs {
			pairs = append(pairs, [2]uint8{uint8(o), uint8(r)})
		}
	}
	add(outInterleaved, reasonNone)
	add(outIncumbentOnly, reasonRamp, reasonGuardrail, reasonChallengerTimeout, reasonChallengerConnect,
		reasonChallengerStatus, reasonChallengerBody, reasonChallengerEmpty, reasonIncumbentStatus,
		reasonIncumbentBody, reasonIncumbentEmpty, reasonMerge, reasonClientGone)
	incumbentFailures := []reason{reasonIncumbentTimeout, reasonIncumbentConnect, reasonIncumbentStatus, reasonIncumbentBody}
	add(outChallengerOnly, incumbentFailures...)
	add(outFailed, incumbentFailures...)
	add(outFailed, reasonRequestTooLarge, reasonRequestBody, reasonClientGone, reasonRequestTimeout)
	return pairs
}
