package jsonptr

import (
	"fmt"
	"net/url"
	"strings"
	"unicode/utf8"
)

// Pointer is a parsed JSON Pointer. The zero Pointer is the empty pointer,
// which refers to the whole document.
type Pointer struct {
	text   string
	tokens []token
}

// token is one reference token, unescaped.
type token struct {
	name string
	// index is the token read as an array index (RFC 6901 section 4:
	// "0" or digits without a leading zero), -1 when it is not one, and
	// dashIndex for "-".
	index int
}

const dashIndex = -2

// maxIndex bounds array indices so that they fit an int on every platform.
const maxIndex = 1<<31 - 1

// Parse parses the JSON string representation of a pointer (RFC 6901
// section 5): empty, or a sequence of "/"-prefixed reference tokens in
// which "~1" stands for "/" and "~0" for "~".
func Parse(s string) (Pointer, error) {
	if s == "" {
		return Pointer{}, nil
	}
	if s[0] != '/' {
		return Pointer{}, fmt.Errorf("jsonptr: %q: %w (RFC 6901: must be empty or start with \"/\")", s, ErrSyntax)
	}
	if !utf8.ValidString(s) {
		return Pointer{}, fmt.Errorf("jsonptr: %q: %w (RFC 6901: a pointer is a Unicode string; this is not valid UTF-8)", s, ErrSyntax)
	}
	parts := strings.Split(s[1:], "/")
	p := Pointer{text: s, tokens: make([]token, len(parts))}
	for i, part := range parts {
		name, err := unescapeToken(part)
		if err != nil {
			return Pointer{}, fmt.Errorf("jsonptr: %q: token %d %q: %w", s, i, part, err)
		}
		p.tokens[i] = token{name: name, index: arrayIndex(name)}
	}
	return p, nil
}

// ParseFragment parses the URI fragment identifier representation of a
// pointer (RFC 6901 section 6): "#" followed by the percent-encoded string
// representation.
func ParseFragment(s string) (Pointer, error) {
	if !strings.HasPrefix(s, "#") {
		return Pointer{}, fmt.Errorf("jsonptr: %q: %w (RFC 6901 section 6: a fragment starts with \"#\")", s, ErrSyntax)
	}
	raw, err := url.PathUnescape(s[1:])
	if err != nil {
		return Pointer{}, fmt.Errorf("jsonptr: %q: %w: %w", s, ErrSyntax, err)
	}
	return Parse(raw)
}

// unescapeToken applies RFC 6901 section 4's decoding: "~1" becomes "/"
// and then "~0" becomes "~"; any other "~" is a syntax error (section 3's
// grammar allows only those two escapes).
func unescapeToken(s string) (string, error) {
	if !strings.Contains(s, "~") {
		return s, nil
	}
	var b strings.Builder
	b.Grow(len(s))
	for i := 0; i < len(s); i++ {
		c := s[i]
		if c != '~' {
			b.WriteByte(c)
			continue
		}
		if i+1 == len(s) || (s[i+1] != '0' && s[i+1] != '1') {
			return "", fmt.Errorf("%w: \"~\" must be followed by 0 or 1", ErrSyntax)
		}
		if s[i+1] == '0' {
			b.WriteByte('~')
		} else {
			b.WriteByte('/')
		}
		i++
	}
	return b.String(), nil
}

// arrayIndex reads a token as RFC 6901's array-index production:
// %x30 / ( %x31-39 *(%x30-39) ), that is "0" or digits with no leading zero.
func arrayIndex(s string) int {
	if s == "-" {
		return dashIndex
	}
	if s == "" || (s[0] == '0' && len(s) > 1) {
		return -1
	}
	n := 0
	for i := 0; i < len(s); i++ {
		c := s[i]
		if c < '0' || c > '9' {
			return -1
		}
		n = n*10 + int(c-'0')
		if n > maxIndex {
			return -1
		}
	}
	return n
}

// String returns the pointer's JSON string representation, as parsed.
func (p Pointer) String() string { return p.text }

// Tokens returns the pointer's reference tokens, unescaped.
func (p Pointer) Tokens() []string {
	out := make([]string, len(p.tokens))
	for i, t := range p.tokens {
		out[i] = t.name
	}
	return out
}

// IsRoot reports whether p is the empty pointer (the whole document).
func (p Pointer) IsRoot() bool { return len(p.tokens) == 0 }

// Span is a half-open byte range [Start, End) of a JSON document.
type Span struct{ Start, End int }

// Find evaluates p over doc, which must be exactly one JSON value with
// optional surrounding white space, and returns the span of the referenced
// value. The whole document is validated, not only the path to the value.
func (p Pointer) Find(doc []byte) (Span, error) {
	w := walker{doc: doc, toks: p.tokens}
	return w.run(p.text)
}

// Element is one element of an array located by FindArray.
type Element struct {
	// Span is the element's span in the document.
	Span
	// ID is the span (in the document) of the value that FindArray's id
	// pointer references inside the element; ID.Start is negative when it
	// references nothing there (no such member or index, "-", or a
	// member name that is not unique).
	ID Span
}

// FindArray is Find for a value that must be an array. In the same single
// pass it appends to dst[:0] each of the array's elements, in order, with
// the span of the value id references inside it (evaluated with the
// element as its document; the empty pointer gives the element itself).
func (p Pointer) FindArray(dst []Element, doc []byte, id Pointer) (Span, []Element, error) {
	w := walker{doc: doc, toks: p.tokens, collect: true, elems: dst[:0], withID: true, id: id.tokens}
	sp, err := w.run(p.text)
	if err != nil {
		return Span{}, w.elems[:0], err
	}
	if doc[sp.Start] != '[' {
		return Span{}, w.elems[:0], fmt.Errorf("jsonptr: %q: %w (found %s)", p.text, ErrNotArray, kindName(doc[sp.Start]))
	}
	return sp, w.elems, nil
}

// Get returns the raw bytes of the value p references in doc.
func (p Pointer) Get(doc []byte) ([]byte, error) {
	sp, err := p.Find(doc)
	if err != nil {
		return nil, err
	}
	return doc[sp.Start:sp.End], nil
}
