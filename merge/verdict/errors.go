package verdict

import "errors"

// ErrInput means the counts or parameters given to a function of this
// package are out of range; the returned error wraps it and says which
// value and why.
var ErrInput = errors.New("verdict: bad input")
