package proxy

import "errors"

var (
	// ErrConfig means Apply (or New) was given a configuration the data
	// plane cannot run; the error names the key path and the bad value.
	ErrConfig = errors.New("invalid data-plane config")
	// ErrTimeout means a backend did not answer within its deadline.
	ErrTimeout = errors.New("backend timed out")
	// ErrConnect means a backend could not be reached or the exchange broke
	// before a response arrived.
	ErrConnect = errors.New("backend unreachable")
	// ErrStatus means a backend answered with a status outside 2xx.
	ErrStatus = errors.New("backend status not 2xx")
	// ErrBody means a backend's response body could not be read or used:
	// unreadable, too large, an unknown content coding, not JSON, or no
	// list at the route's pointer.
	ErrBody = errors.New("backend body unusable")
)
