package config

import (
	"errors"
	"fmt"
	"strings"
)

// ErrInvalid is matched (with errors.Is) by an *Error whose file could not
// be read as YAML, had unknown keys or wrongly typed values, or failed
// validation.
var ErrInvalid = errors.New("config: invalid")

// ErrNeedsRestart is matched by the *Error a Reloader returns when the new
// file is valid but changes a setting that only takes effect at start (see
// RestartOnly).
var ErrNeedsRestart = errors.New("config: change needs a restart")

// Problem is one thing wrong with a configuration.
type Problem struct {
	// Path is the key path of the offending value, for example
	// "routes[0].list" or "experiment.schedule[1].ramp"; empty when the
	// problem concerns the whole file (a YAML syntax error, say).
	Path string `json:"path"`
	// Message says what is wrong, quoting the bad value.
	Message string `json:"message"`
	// Line is the 1-based line in the source where the value (or the
	// nearest enclosing key present) is written; 0 when unknown.
	Line int `json:"line,omitempty"`
}

// String returns "path: message", or the message alone for a whole-file
// problem.
func (p Problem) String() string {
	if p.Path == "" {
		return p.Message
	}
	return p.Path + ": " + p.Message
}

// Error reports every problem found in one configuration source.
type Error struct {
	// Source names the file (or other origin) the configuration came from.
	Source string
	// Problems lists every problem found, in the order of the checks.
	Problems []Problem
	// Restart is true when the problems are changes that need a restart
	// rather than invalid values; the error then matches ErrNeedsRestart
	// instead of ErrInvalid.
	Restart bool
}

// Lines returns one line per problem, "source:line: path: message", with
// ":line" left out when the line is unknown and "source:" when Source is
// empty.
func (e *Error) Lines() []string {
	out := make([]string, 0, len(e.Problems))
	for _, p := range e.Problems {
		var b strings.Builder
		if e.Source != "" {
			b.WriteString(e.Source)
			if p.Line > 0 {
				fmt.Fprintf(&b, ":%d", p.Line)
			}
			b.WriteString(": ")
		}
		b.WriteString(p.String())
		out = append(out, b.String())
	}
	return out
}

// Error returns every problem, one per line.
func (e *Error) Error() string {
	if len(e.Problems) == 0 {
		return "config: " + e.Source + ": invalid"
	}
	return strings.Join(e.Lines(), "\n")
}

// Unwrap returns ErrNeedsRestart when Restart is set and ErrInvalid
// otherwise, for errors.Is.
func (e *Error) Unwrap() error {
	if e.Restart {
		return ErrNeedsRestart
	}
	return ErrInvalid
}
