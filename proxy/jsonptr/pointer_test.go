package jsonptr

import (
	"bytes"
	"encoding/json"
	"errors"
	"strconv"
	"strings"
	"testing"
)

// rfcDoc is the example document of RFC 6901 section 5, byte for byte.
const rfcDoc = `{
      "foo": ["bar", "baz"],
      "": 0,
      "a/b": 1,
      "c%d": 2,
      "e^f": 3,
      "g|h": 4,
      "i\\j": 5,
      "k\"l": 6,
      " ": 7,
      "m~n": 8
   }`

// TestRFC6901Section5 checks every example of RFC 6901 section 5 ("JSON
// String Representation"): each pointer, given there as a JSON string,
// evaluates to the value the RFC lists.
func TestRFC6901Section5(t *testing.T) {
	tests := []struct {
		jsonString string // the pointer exactly as RFC 6901 section 5 prints it
		want       string
	}{
		{`""`, rfcDoc},
		{`"/foo"`, `["bar", "baz"]`},
		{`"/foo/0"`, `"bar"`},
		{`"/"`, `0`},
		{`"/a~1b"`, `1`},
		{`"/c%d"`, `2`},
		{`"/e^f"`, `3`},
		{`"/g|h"`, `4`},
		{`"/i\\j"`, `5`},
		{`"/k\"l"`, `6`},
		{`"/ "`, `7`},
		{`"/m~0n"`, `8`},
	}
	for _, tt := range tests {
		t.Run(tt.jsonString, func(t *testing.T) {
			var text string
			if err := json.Unmarshal([]byte(tt.jsonString), &text); err != nil {
				t.Fatalf("decode the RFC's string %s: %v", tt.jsonString, err)
			}
			p, err := Parse(text)
			if err != nil {
				t.Fatalf("Parse(%q): %v", text, err)
			}
			got, err := p.Get([]byte(rfcDoc))
			if err != nil {
				t.Fatalf("Get(%q): %v", text, err)
			}
			if string(got) != tt.want {
				t.Errorf("Get(%q) = %s, want %s", text, got, tt.want)
			}
		})
	}
}

// TestRFC6901Section6 checks every example of RFC 6901 section 6 ("URI
// Fragment Identifier Representation") against the same document.
func TestRFC6901Section6(t *testing.T) {
	tests := []struct{ fragment, want string }{
		{"#", rfcDoc},
		{"#/foo", `["bar", "baz"]`},
		{"#/foo/0", `"bar"`},
		{"#/", `0`},
		{"#/a~1b", `1`},
		{"#/c%25d", `2`},
		{"#/e%5Ef", `3`},
		{"#/g%7Ch", `4`},
		{"#/i%5Cj", `5`},
		{"#/k%22l", `6`},
		{"#/%20", `7`},
		{"#/m~0n", `8`},
	}
	for _, tt := range tests {
		t.Run(tt.fragment, func(t *testing.T) {
			p, err := ParseFragment(tt.fragment)
			if err != nil {
				t.Fatalf("ParseFragment(%q): %v", tt.fragment, err)
			}
			got, err := p.Get([]byte(rfcDoc))
			if err != nil {
				t.Fatalf("Get(%q): %v", tt.fragment, err)
			}
			if string(got) != tt.want {
				t.Errorf("Get(%q) = %s, want %s", tt.fragment, got, tt.want)
			}
		})
	}
}

func TestParse(t *testing.T) {
	tests := []struct {
		in         string
		wantTokens []string
		wantErr    error
	}{
		{"", []string{}, nil},
		{"/", []string{""}, nil},
		{"//", []string{"", ""}, nil},
		{"/items/0/sku", []string{"items", "0", "sku"}, nil},
		{"/~01", []string{"~1"}, nil}, // RFC 6901 section 4: "~01" is "~1", not "/"
		{"/a~1b~0c", []string{"a/b~c"}, nil},
		{"items", nil, ErrSyntax},
		{"/a~", nil, ErrSyntax},
		{"/a~2", nil, ErrSyntax},
		{"#/a", nil, ErrSyntax},
		{"/\xff", nil, ErrSyntax},
	}
	for _, tt := range tests {
		t.Run(tt.in, func(t *testing.T) {
			p, err := Parse(tt.in)
			if !errors.Is(err, tt.wantErr) {
				t.Fatalf("Parse(%q) error = %v, want %v", tt.in, err, tt.wantErr)
			}
			if err != nil {
				if q := strconv.Quote(tt.in); !strings.Contains(err.Error(), q) {
					t.Errorf("error %q does not quote the pointer %s", err, q)
				}
				return
			}
			if got := p.Tokens(); strings.Join(got, "\x00") != strings.Join(tt.wantTokens, "\x00") || len(got) != len(tt.wantTokens) {
				t.Errorf("Tokens() = %q, want %q", got, tt.wantTokens)
			}
			if p.String() != tt.in {
				t.Errorf("String() = %q, want %q", p.String(), tt.in)
			}
		})
	}
}

func TestParseFragmentErrors(t *testing.T) {
	for _, in := range []string{"/a", "#a", "#/%zz", "#/~2"} {
		if _, err := ParseFragment(in); !errors.Is(err, ErrSyntax) {
			t.Errorf("ParseFragment(%q) error = %v, want ErrSyntax", in, err)
		}
	}
}

func TestFind(t *testing.T) {
	const doc = ` {"items": [{"sku": "a"}, {"sku": 12}, {"sku": null}], "n": {"": [true]}} `
	tests := []struct {
		ptr, want string
		wantErr   error
	}{
		{"/items/1/sku", `12`, nil},
		{"/items/2/sku", `null`, nil},
		{"/n//0", `true`, nil},
		{"/items/3", "", ErrNotFound},
		{"/items/01", "", ErrNotFound}, // leading zeros are not array indices (RFC 6901 section 4)
		{"/items/-", "", ErrPastEnd},   // RFC 6901 section 4: "-" is always an error here
		{"/items/x", "", ErrNotFound},
		{"/items/0/sku/0", "", ErrNotFound},
		{"/missing", "", ErrNotFound},
		{"/n/0", "", ErrNotFound},
	}
	for _, tt := range tests {
		t.Run(tt.ptr, func(t *testing.T) {
			p, err := Parse(tt.ptr)
			if err != nil {
				t.Fatal(err)
			}
			got, err := p.Get([]byte(doc))
			if !errors.Is(err, tt.wantErr) {
				t.Fatalf("Get(%q) error = %v, want %v", tt.ptr, err, tt.wantErr)
			}
			if string(got) != tt.want {
				t.Errorf("Get(%q) = %s, want %s", tt.ptr, got, tt.want)
			}
		})
	}
}

func TestFindInvalid(t *testing.T) {
	docs := []string{
		``, ` `, `{`, `[1,]`, `{"a":1,}`, `{"a" 1}`, `{1:2}`, `[1 2]`, `01`, `1.`, `1e`, `-`,
		`"\x"`, `"\u12g4"`, "\"a\x01\"", `"abc`, `tru`, `nul`, `{"a":1}x`, `[1]]`,
		strings.Repeat("[", maxDepth+1) + strings.Repeat("]", maxDepth+1),
	}
	for _, doc := range docs {
		_, err := Pointer{}.Find([]byte(doc))
		if !errors.Is(err, ErrInvalidJSON) {
			t.Errorf("Find(%.20q) error = %v, want ErrInvalidJSON", doc, err)
		}
		if json.Valid([]byte(doc)) {
			t.Errorf("encoding/json accepts %.20q that the test calls invalid", doc)
		}
	}
}

// TestDuplicateMember: RFC 6901 section 4 says evaluation fails when the
// referenced member name is not unique.
func TestDuplicateMember(t *testing.T) {
	p, _ := Parse("/a")
	if _, err := p.Find([]byte(`{"a":1,"b":2,"\u0061":3}`)); !errors.Is(err, ErrDuplicateMember) {
		t.Errorf("Find error = %v, want ErrDuplicateMember", err)
	}
	if _, err := p.Find([]byte(`{"a":1,"b":{"x":1,"x":2}}`)); err != nil {
		t.Errorf("a duplicate off the path must not fail evaluation: %v", err)
	}
}

func TestFindArray(t *testing.T) {
	p, _ := Parse("/items")
	doc := []byte(`{"items":[ {"x":[1,2]} , "s",3 ],"z":[]}`)
	sp, elems, err := p.FindArray(nil, doc, Pointer{})
	if err != nil {
		t.Fatal(err)
	}
	if got, want := string(doc[sp.Start:sp.End]), `[ {"x":[1,2]} , "s",3 ]`; got != want {
		t.Errorf("array span = %s, want %s", got, want)
	}
	var got []string
	for _, e := range elems {
		got = append(got, string(doc[e.Start:e.End]))
		if e.ID != e.Span {
			t.Errorf("with the empty id pointer, ID %v should be the element %v", e.ID, e.Span)
		}
	}
	if want := []string{`{"x":[1,2]}`, `"s"`, `3`}; strings.Join(got, "|") != strings.Join(want, "|") {
		t.Errorf("elements = %q, want %q", got, want)
	}
	z, _ := Parse("/z")
	if _, elems, err := z.FindArray(elems, doc, Pointer{}); err != nil || len(elems) != 0 {
		t.Errorf("empty array: elems %v, err %v; want none, nil", elems, err)
	}
	s, _ := Parse("/items/1")
	if _, _, err := s.FindArray(nil, doc, Pointer{}); !errors.Is(err, ErrNotArray) {
		t.Errorf("FindArray on a string: error = %v, want ErrNotArray", err)
	}
}

// TestFindArrayIDs evaluates an id pointer inside each element, with the
// element as the document (RFC 6901 section 4 rules apply within it).
func TestFindArrayIDs(t *testing.T) {
	doc := []byte(`{"items":[{"sku":"a"},{"name":"x"},{"sku":1,"sku":2},{"meta":{"sku":"m"}},` +
		`[0,"i"],{"sku":{"v":1}},{"a":1,"sku":"\u0062"},"bare"]}`)
	tests := []struct {
		id   string
		want []string // the ID value of each element; "" for none
	}{
		{"/sku", []string{`"a"`, "", "", "", "", `{"v":1}`, `"\u0062"`, ""}},
		{"/meta/sku", []string{"", "", "", `"m"`, "", "", "", ""}},
		{"/1", []string{"", "", "", "", `"i"`, "", "", ""}},
		{"/-", []string{"", "", "", "", "", "", "", ""}},
	}
	list, _ := Parse("/items")
	for _, tt := range tests {
		id, err := Parse(tt.id)
		if err != nil {
			t.Fatal(err)
		}
		_, elems, err := list.FindArray(nil, doc, id)
		if err != nil {
			t.Fatalf("id %q: %v", tt.id, err)
		}
		var got []string
		for _, e := range elems {
			v := ""
			if e.ID.Start >= 0 {
				v = string(doc[e.ID.Start:e.ID.End])
			}
			got = append(got, v)
		}
		if strings.Join(got, "|") != strings.Join(tt.want, "|") {
			t.Errorf("id %q: values %q, want %q", tt.id, got, tt.want)
		}
	}
}

func TestAppendUnquote(t *testing.T) {
	tests := []string{`""`, `"plain"`, `"a\"b\\c\/d"`, `"\b\f\n\r\t"`, `"\u00e9\u20ac"`,
		`"\ud83c\udf31"`, `"\ud83c"`, `"\udf31x"`, `"\ud83c\u0041"`}
	for _, in := range tests {
		var want string
		if err := json.Unmarshal([]byte(in), &want); err != nil {
			t.Fatalf("encoding/json rejects %s: %v", in, err)
		}
		got, err := AppendUnquote(nil, []byte(in))
		if err != nil {
			t.Fatalf("AppendUnquote(%s): %v", in, err)
		}
		// encoding/json is the reference decoder for the expected text.
		if string(got) != want {
			t.Errorf("AppendUnquote(%s) = %q, want %q (encoding/json)", in, got, want)
		}
	}
	for _, in := range []string{``, `x`, `"a`, `"a"b`, `1`} {
		if _, err := AppendUnquote(nil, []byte(in)); !errors.Is(err, ErrInvalidJSON) {
			t.Errorf("AppendUnquote(%q) error = %v, want ErrInvalidJSON", in, err)
		}
	}
}

func TestEscapedMemberName(t *testing.T) {
	p, _ := Parse("/é/a~1b")
	got, err := p.Get([]byte(`{"\u00e9":{"a\/b":true}}`))
	if err != nil || !bytes.Equal(got, []byte("true")) {
		t.Errorf("Get = %s, %v; want true, nil", got, err)
	}
}
