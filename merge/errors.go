package merge

import "errors"

// ErrUnknownPolicy is returned by New when no policy has the requested name.
var ErrUnknownPolicy = errors.New("unknown interleaving policy")

// ErrBadOption is returned when a policy option (such as the probabilistic
// policy's tau or the optimized policy's credit function) is out of range.
var ErrBadOption = errors.New("invalid policy option")
