package jsonptr

import (
	"fmt"
)

// maxDepth bounds nesting so that hostile input cannot exhaust the stack;
// encoding/json's scanner uses the same limit (recalled from memory).
const maxDepth = 10000

// walker validates a document in one pass and notes the span of the value
// its tokens reference, and optionally, inside each element of that value
// (an array), the span of the value a second pointer references.
//
// A position on a path is one int d: 0..len(toks) along the main pointer
// (len(toks) being its target), base..base+len(id) along the element
// pointer inside the element being walked, and -1 off both paths. The two
// never overlap, as the element path starts below the main target.
type walker struct {
	doc  []byte
	toks []token
	// collect asks for the target array's elements.
	collect bool
	elems   []Element
	// withID asks, for each element, for the value at id.
	withID bool
	id     []token
	base   int
	found  bool
	span   Span
	// miss is why the main path could not be followed, set where it broke off.
	miss error
	// cur is the element being walked when collecting.
	cur Element
}

func (w *walker) run(ptr string) (Span, error) {
	w.base = len(w.toks) + 1
	end, err := w.value(skipWS(w.doc, 0), 0, 0)
	if err == nil {
		if end = skipWS(w.doc, end); end != len(w.doc) {
			err = invalid(end, "data after the top-level value")
		}
	}
	if err != nil {
		return Span{}, fmt.Errorf("jsonptr: %q: %w", ptr, err)
	}
	if !w.found {
		return Span{}, fmt.Errorf("jsonptr: %q: %w", ptr, w.miss)
	}
	return w.span, nil
}

// tok returns the token that position d must match next, if d is on a
// path and short of its target.
func (w *walker) tok(d int) (token, bool) {
	switch {
	case d >= 0 && d < len(w.toks):
		return w.toks[d], true
	case w.withID && d >= w.base && d-w.base < len(w.id):
		return w.id[d-w.base], true
	}
	return token{}, false
}

// value scans the value at i and returns its end.
func (w *walker) value(i, d, depth int) (int, error) {
	if i >= len(w.doc) {
		return i, invalid(i, "unexpected end of input, want a value")
	}
	var end int
	var err error
	c := w.doc[i]
	switch {
	case c == '{':
		end, err = w.object(i, d, depth+1)
	case c == '[':
		end, err = w.array(i, d, depth+1)
	case c == '"':
		end, _, err = skipString(w.doc, i)
	case c == '-' || (c >= '0' && c <= '9'):
		end, err = skipNumber(w.doc, i)
	case c == 't':
		end, err = skipLiteral(w.doc, i, "true")
	case c == 'f':
		end, err = skipLiteral(w.doc, i, "false")
	case c == 'n':
		end, err = skipLiteral(w.doc, i, "null")
	default:
		return i, invalid(i, fmt.Sprintf("unexpected %q, want a value", c))
	}
	if err != nil {
		return end, err
	}
	switch {
	case d == len(w.toks):
		w.found, w.span = true, Span{i, end}
	case w.withID && d == w.base+len(w.id):
		w.cur.ID = Span{i, end}
	case d >= 0 && d < len(w.toks) && c != '{' && c != '[':
		w.setMiss(d, "the value there is "+kindName(c))
	}
	return end, nil
}

func (w *walker) object(i, d, depth int) (int, error) {
	if depth > maxDepth {
		return i, invalid(i, "nesting too deep")
	}
	want, onPath := w.tok(d)
	matched := false
	i = skipWS(w.doc, i+1)
	if i < len(w.doc) && w.doc[i] == '}' {
		i++
	} else {
		for done := false; !done; {
			if i >= len(w.doc) || w.doc[i] != '"' {
				return i, invalid(i, "want a member name")
			}
			kend, esc, err := skipString(w.doc, i)
			if err != nil {
				return kend, err
			}
			child := -1
			if onPath && keyEquals(w.doc[i+1:kend-1], esc, want.name) {
				if matched {
					if err := w.duplicate(d, i); err != nil {
						return i, err
					}
				} else {
					matched, child = true, d+1
				}
			}
			if i = skipWS(w.doc, kend); i >= len(w.doc) || w.doc[i] != ':' {
				return i, invalid(i, "want ':' after a member name")
			}
			if i, err = w.member(skipWS(w.doc, i+1), child, depth); err != nil {
				return i, err
			}
			if i, done, err = w.next(i, '}'); err != nil {
				return i, err
			}
		}
	}
	if onPath && !matched {
		w.setMiss(d, "the object has no such member")
	}
	return i, nil
}

// member scans a member's value at i. Off both paths a string or a number
// (most members of a list element) is skipped directly, without value's
// bookkeeping: nothing there can be a target.
func (w *walker) member(i, d, depth int) (int, error) {
	if d < 0 && i < len(w.doc) {
		switch c := w.doc[i]; {
		case c == '"':
			end, _, err := skipString(w.doc, i)
			return end, err
		case c == '-' || (c >= '0' && c <= '9'):
			return skipNumber(w.doc, i)
		}
	}
	return w.value(i, d, depth)
}

// duplicate handles a second member matching the token at d: RFC 6901
// section 4 makes evaluation fail. On the main path that is an error; on
// the element path the element has no identity, and the walk goes on.
func (w *walker) duplicate(d, at int) error {
	if d < len(w.toks) {
		return fmt.Errorf("%w: token %d %q at byte %d", ErrDuplicateMember, d, w.toks[d].name, at)
	}
	w.cur.ID = Span{-1, -1}
	return nil
}

// next steps over the separator after a member or element: it returns the
// start of the next one, or the offset past closer with done set.
func (w *walker) next(i int, closer byte) (int, bool, error) {
	i = skipWS(w.doc, i)
	if i < len(w.doc) {
		switch w.doc[i] {
		case ',':
			return skipWS(w.doc, i+1), false, nil
		case closer:
			return i + 1, true, nil
		}
	}
	return i, true, invalid(i, fmt.Sprintf("want ',' or '%c'", closer))
}

func (w *walker) array(i, d, depth int) (int, error) {
	if depth > maxDepth {
		return i, invalid(i, "nesting too deep")
	}
	t, onPath := w.tok(d)
	want := t.index
	switch {
	case !onPath:
	case want == dashIndex && d < len(w.toks):
		return i, fmt.Errorf("%w: token %d", ErrPastEnd, d)
	case want < 0:
		w.setMiss(d, "the value there is an array and the token is not an array index")
		onPath = false
	}
	collect := w.collect && d == len(w.toks)
	n := 0
	i = skipWS(w.doc, i+1)
	if i < len(w.doc) && w.doc[i] == ']' {
		i++
	} else {
		for done := false; !done; n++ {
			child := -1
			switch {
			case onPath && n == want:
				child = d + 1
			case collect && w.withID:
				child = w.base
			}
			end, err := w.element(i, child, depth, collect)
			if err != nil {
				return end, err
			}
			if i, done, err = w.next(end, ']'); err != nil {
				return i, err
			}
		}
	}
	if onPath && want >= n {
		w.setMiss(d, fmt.Sprintf("the array has %d elements", n))
	}
	return i, nil
}

// element scans one array element, noting it when collecting.
func (w *walker) element(i, child, depth int, collect bool) (int, error) {
	if !collect {
		return w.value(i, child, depth)
	}
	w.cur = Element{ID: Span{-1, -1}}
	end, err := w.value(i, child, depth)
	w.cur.Span = Span{i, end}
	w.elems = append(w.elems, w.cur)
	return end, err
}

// setMiss notes why the main path broke off at d; misses on the element
// path just leave the element without an identity.
func (w *walker) setMiss(d int, why string) {
	if w.miss == nil && d < len(w.toks) {
		w.miss = fmt.Errorf("%w: token %d %q: %s", ErrNotFound, d, w.toks[d].name, why)
	}
}

func invalid(off int, what string) error {
	return fmt.Errorf("%w at byte %d: %s", ErrInvalidJSON, off, what)
}

// kindName names the kind of the JSON value that starts with c.
func kindName(c byte) string {
	switch {
	case c == '{':
		return "an object"
	case c == '[':
		return "an array"
	case c == '"':
		return "a string"
	case c == 't' || c == 'f':
		return "a boolean"
	case c == 'n':
		return "null"
	}
	return "a number"
}
