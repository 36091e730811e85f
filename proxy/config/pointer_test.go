package config

import (
	"regexp"
	"testing"
	"unicode/utf8"
)

// TestPointerSyntaxRFC6901 checks the pointers of RFC 6901 section 5, all
// valid, and strings that break the grammar of section 3.
func TestPointerSyntaxRFC6901(t *testing.T) {
	// RFC 6901 section 5, the JSON string representations of its examples.
	valid := []string{"", "/foo", "/foo/0", "/", "/a~1b", "/c%d", "/e^f", "/g|h", `/i\j`, `/k"l`, "/ ", "/m~0n"}
	for _, p := range valid {
		if msg := pointerProblem(p); msg != "" {
			t.Errorf("pointerProblem(%q) = %q, want valid (RFC 6901 section 5)", p, msg)
		}
	}
	tests := []struct{ in, want string }{
		{"foo", `"foo" is not a JSON pointer (RFC 6901: must be empty or start with "/")`},
		// Section 6's URI fragment form is not the JSON string form.
		{"#/foo", `"#/foo" is not a JSON pointer (RFC 6901: must be empty or start with "/")`},
		{"/~", `"/~" is not a JSON pointer (RFC 6901: "~" must be followed by "0" or "1"; character 2)`},
		{"/~2", `"/~2" is not a JSON pointer (RFC 6901: "~" must be followed by "0" or "1"; character 2)`},
		{"/é/~x", `"/é/~x" is not a JSON pointer (RFC 6901: "~" must be followed by "0" or "1"; character 4)`},
		{"/a\xff", `"/a\xff" is not a JSON pointer (RFC 6901: must be valid UTF-8)`},
	}
	for _, tt := range tests {
		if got := pointerProblem(tt.in); got != tt.want {
			t.Errorf("pointerProblem(%q):\n got %s\nwant %s", tt.in, got, tt.want)
		}
	}
}

// pointerGrammar is RFC 6901 section 3's ABNF written as a regular
// expression: json-pointer = *( "/" reference-token ), reference-token =
// *( unescaped / escaped ), escaped = "~" ( "0" / "1" ), where unescaped is
// any character but "/" and "~".
var pointerGrammar = regexp.MustCompile(`^(/([^/~]|~[01])*)*$`)

// FuzzPointerSyntax checks pointerProblem against the grammar above.
func FuzzPointerSyntax(f *testing.F) {
	for _, s := range []string{"", "/", "/a~1b", "/m~0n", "/~", "/~2", "x", "/a/~01", "//", "/é~1"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		if !utf8.ValidString(s) {
			if pointerProblem(s) == "" {
				t.Fatalf("pointerProblem(%q) accepted invalid UTF-8", s)
			}
			return
		}
		if got, want := pointerProblem(s) == "", pointerGrammar.MatchString(s); got != want {
			t.Fatalf("pointerProblem(%q) valid=%v, RFC 6901 grammar says %v", s, got, want)
		}
	})
}
