package jsonptr

import "errors"

var (
	// ErrSyntax means the pointer text is not an RFC 6901 JSON Pointer.
	ErrSyntax = errors.New("not a JSON pointer")
	// ErrInvalidJSON means the document is not valid JSON (RFC 8259).
	ErrInvalidJSON = errors.New("invalid JSON")
	// ErrNotFound means the pointer references no value in the document.
	ErrNotFound = errors.New("no value at pointer")
	// ErrPastEnd means a "-" token was evaluated: it names the element after
	// the last one of an array, which never exists for reading (RFC 6901
	// section 4).
	ErrPastEnd = errors.New(`"-" refers past the end of the array`)
	// ErrDuplicateMember means a token matched more than one member of an
	// object, for which RFC 6901 section 4 says evaluation fails.
	ErrDuplicateMember = errors.New("member name is not unique")
	// ErrNotArray means Elements was given a value that is not an array.
	ErrNotArray = errors.New("not a JSON array")
)
