package config

import (
	"fmt"
	"unicode/utf8"
)

// pointerProblem says why s is not a JSON pointer by the syntax of RFC 6901
// section 3, or returns "" when it is one:
//
//	json-pointer = *( "/" reference-token )
//	escaped      = "~" ( "0" / "1" )
//
// Only the syntax is checked here; evaluating a pointer against a document
// belongs to the data plane.
func pointerProblem(s string) string {
	switch {
	case s == "":
		return ""
	case !utf8.ValidString(s):
		return fmt.Sprintf("%q is not a JSON pointer (RFC 6901: must be valid UTF-8)", s)
	case s[0] != '/':
		return fmt.Sprintf("%q is not a JSON pointer (RFC 6901: must be empty or start with \"/\")", s)
	}
	pos := 0
	for i, r := range s {
		pos++
		if r != '~' {
			continue
		}
		if i+1 >= len(s) || (s[i+1] != '0' && s[i+1] != '1') {
			return fmt.Sprintf("%q is not a JSON pointer (RFC 6901: \"~\" must be followed by \"0\" or \"1\"; character %d)", s, pos)
		}
	}
	return ""
}
