package store

import "errors"

// Errors returned by the store. Callers test them with errors.Is; the
// returned errors wrap them with the path, impression or key concerned.
var (
	// ErrLocked means another process (another riffle) holds the file's
	// lock and did not release it within Options.Timeout. It reads as the
	// end of "store <path> is locked by another riffle".
	ErrLocked = errors.New("is locked by another riffle")
	// ErrNotStore means the file is not a bbolt file, or a bbolt file that
	// riffle did not create.
	ErrNotStore = errors.New("not a riffle store")
	// ErrSchema means the file was written with a schema version this
	// build does not read.
	ErrSchema = errors.New("unsupported store schema version")
	// ErrCorrupt means a record could not be decoded.
	ErrCorrupt = errors.New("corrupt store record")
	// ErrClosed means the store was closed.
	ErrClosed = errors.New("store is closed")
	// ErrReadOnly means the store was opened read-only and cannot be written.
	ErrReadOnly = errors.New("store is read-only")

	// ErrBadEvent means an event lacks an item or an event type, or its
	// idempotency key is too long.
	ErrBadEvent = errors.New("bad event")
	// ErrUnknownImpression means no impression with the event's id exists
	// (never served, lost, or already deleted by retention).
	ErrUnknownImpression = errors.New("unknown impression")
	// ErrItemNotShown means the event's item is not in the impression.
	ErrItemNotShown = errors.New("item not shown in the impression")
	// ErrUnknownEvent means the event type has no weight in the rules.
	ErrUnknownEvent = errors.New("unknown event type")
	// ErrTooEarly means the event's time is before the impression's.
	ErrTooEarly = errors.New("event before its impression")
	// ErrTooLate means the event's time is after the impression's
	// attribution window, or the impression is already finalised.
	ErrTooLate = errors.New("event after the attribution window")
	// ErrDuplicate means the event was already recorded: the same
	// impression, item, event type and key, or the same key alone when a
	// key is given. A duplicate is not recorded again.
	ErrDuplicate = errors.New("duplicate event")
)

// ErrUnavailable means the store cannot accept or answer now: its database
// is down or unreachable, or a bounded wait for it passed. Nothing was
// recorded; the caller may retry (POST /feedback answers 503 with
// Retry-After).
var ErrUnavailable = errors.New("store unavailable")

// ErrUnknownPolicy means an impression names a policy this riffle cannot
// resolve; the impression is set aside, never counted.
var ErrUnknownPolicy = errors.New("unknown policy")
