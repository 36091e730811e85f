package jsonptr

import (
	"bytes"
	"encoding/json"
	"errors"
	"reflect"
	"strconv"
	"strings"
	"testing"
	"unicode/utf8"
)

// FuzzParse checks that Parse never panics, that a parsed pointer prints
// back as its input, and that re-escaping its tokens (RFC 6901 section 4,
// "~" before "/") yields the input again.
func FuzzParse(f *testing.F) {
	for _, s := range []string{"", "/", "/foo/0", "/a~1b", "/m~0n", "/~01", "/~", "/~2", "x", "/-", "/01"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		p, err := Parse(s)
		if err != nil {
			if !errors.Is(err, ErrSyntax) {
				t.Fatalf("Parse(%q) error %v does not wrap ErrSyntax", s, err)
			}
			return
		}
		if p.String() != s {
			t.Fatalf("String() = %q, want %q", p.String(), s)
		}
		var b strings.Builder
		for _, tok := range p.Tokens() {
			b.WriteString("/")
			b.WriteString(strings.NewReplacer("~", "~0", "/", "~1").Replace(tok))
		}
		if b.String() != s {
			t.Fatalf("re-escaped tokens %q, want %q", b.String(), s)
		}
	})
}

// FuzzFind compares Find with a reference evaluation over the document as
// decoded by encoding/json: validity must agree with json.Valid, and a
// value found must decode to what the reference finds.
func FuzzFind(f *testing.F) {
	f.Add([]byte(rfcDoc), "/foo/1")
	f.Add([]byte(`{"items":[{"sku":"a"},{"sku":2}]}`), "/items/1/sku")
	f.Add([]byte(`[1,[2,[3]]]`), "/1/1/0")
	f.Add([]byte(`{"a\u002fb":{"":null}}`), "/a~1b/")
	f.Add([]byte(`{"a":1,"a":2}`), "/a")
	f.Add([]byte(`[1.5e3,-0,"\ud83c\udf31"]`), "/2")
	f.Add([]byte(`{"x":[tru]}`), "/x")
	f.Add([]byte(`{"l":[[{"sku":1}],[{"sku":2,"sku":3}],[],[{}],7]}`), "/l")
	f.Fuzz(func(t *testing.T, doc []byte, ptr string) {
		p, err := Parse(ptr)
		if err != nil {
			return
		}
		_, rootErr := Pointer{}.Find(doc)
		valid := json.Valid(doc)
		if deep := bytes.Count(doc, []byte("[")) + bytes.Count(doc, []byte("{")); deep < maxDepth && valid != (rootErr == nil) {
			t.Fatalf("json.Valid = %v but Find error = %v for %q", valid, rootErr, doc)
		}
		sp, err := p.Find(doc)
		if err == nil && (sp.Start < 0 || sp.End > len(doc) || !json.Valid(doc[sp.Start:sp.End])) {
			t.Fatalf("span %v of %q is not a JSON value", sp, doc)
		}
		if !valid || !utf8.Valid(doc) || errors.Is(err, ErrDuplicateMember) {
			return
		}
		root := decode(doc)
		want, ok := reference(root, p.Tokens())
		if ok != (err == nil) {
			t.Fatalf("reference found=%v, Find error = %v (doc %q, ptr %q)", ok, err, doc, ptr)
		}
		if ok {
			if got := decode(doc[sp.Start:sp.End]); !reflect.DeepEqual(got, want) {
				t.Fatalf("Find gives %s, reference gives %v", doc[sp.Start:sp.End], want)
			}
			checkElements(t, doc, p, want)
		}
	})
}

// checkElements checks FindArray's per-element lookup of the pointer
// "/0/sku" against the reference over each decoded element.
func checkElements(t *testing.T, doc []byte, p Pointer, target any) {
	arr, isArray := target.([]any)
	id, _ := Parse("/0/sku")
	_, elems, err := p.FindArray(nil, doc, id)
	if !isArray {
		if !errors.Is(err, ErrNotArray) {
			t.Fatalf("FindArray on a non-array: error %v, want ErrNotArray", err)
		}
		return
	}
	if err != nil || len(elems) != len(arr) {
		t.Fatalf("FindArray: %d elements, error %v; reference has %d", len(elems), err, len(arr))
	}
	for i, e := range elems {
		want, ok := reference(arr[i], id.Tokens())
		if ok && hasDuplicateKeys(doc[e.Start:e.End]) {
			continue // encoding/json keeps the last duplicate, RFC 6901 fails
		}
		if ok != (e.ID.Start >= 0) || (ok && !reflect.DeepEqual(decode(doc[e.ID.Start:e.ID.End]), want)) {
			t.Fatalf("element %d: ID %v, reference %v found=%v", i, e.ID, want, ok)
		}
	}
}

func hasDuplicateKeys(v []byte) bool {
	p, _ := Parse("/0/sku")
	_, err := p.Find(v)
	return errors.Is(err, ErrDuplicateMember)
}

func decode(b []byte) any {
	var v any
	d := json.NewDecoder(bytes.NewReader(b))
	d.UseNumber()
	if d.Decode(&v) != nil {
		return nil
	}
	return v
}

// reference evaluates tokens over a decoded document the way RFC 6901
// section 4 describes it, as an independent check of the byte walker.
func reference(v any, toks []string) (any, bool) {
	for _, tok := range toks {
		switch c := v.(type) {
		case map[string]any:
			var ok bool
			if v, ok = c[tok]; !ok {
				return nil, false
			}
		case []any:
			if tok == "" || (tok[0] == '0' && len(tok) > 1) || tok[0] == '+' {
				return nil, false
			}
			i, err := strconv.Atoi(tok)
			if err != nil || i < 0 || i >= len(c) {
				return nil, false
			}
			v = c[i]
		default:
			return nil, false
		}
	}
	return v, true
}
