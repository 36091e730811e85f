package admin

import "errors"

// Sentinel errors; wrapped errors from this package match them with errors.Is.
var (
	// ErrNoToken means a request to a token-protected endpoint carried no
	// bearer token.
	ErrNoToken = errors.New("admin: no bearer token")
	// ErrWrongToken means the bearer token did not match.
	ErrWrongToken = errors.New("admin: wrong bearer token")
	// ErrEmptyToken means a token file holds no token.
	ErrEmptyToken = errors.New("admin: token file is empty")
	// ErrNotReached means a backend has not answered recently enough for
	// the process to be ready.
	ErrNotReached = errors.New("admin: backend not reached recently")
)
