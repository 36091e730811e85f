package simulate

import "errors"

var (
	// ErrSyntax is wrapped by every error about a malformed line of a
	// qrels or run file; the message names the file and line.
	ErrSyntax = errors.New("syntax error")
	// ErrNoQueries is returned when judgements and runs share no query to
	// simulate on.
	ErrNoQueries = errors.New("no query to simulate")
	// ErrUnknownClickModel is returned by NewClickModel for a name it does
	// not know.
	ErrUnknownClickModel = errors.New("unknown click model")
	// ErrConfig is wrapped by every error about an out-of-range Config
	// field; the message names the field.
	ErrConfig = errors.New("invalid simulation config")
)
