package main

import (
	"strings"
	"testing"
)

func TestParseList(t *testing.T) {
	src := "# a comment\n\nname: a\npackage: ./x ./y\nfile: x/x.go\nold: if a > b {\nnew:\nwhy: w\n\n" +
		"name: b\npackage: ./x\nfile: x/x.go\nold: \"\\treturn -x\\n\"\nnew: \"not\" a literal\nequivalent: same\n"
	ms, err := ParseList(strings.NewReader(src), "list")
	if err != nil {
		t.Fatal(err)
	}
	if len(ms) != 2 {
		t.Fatalf("%d mutations, want 2", len(ms))
	}
	a, b := ms[0], ms[1]
	if a.Name != "a" || strings.Join(a.Packages, ",") != "./x,./y" || a.Old != "if a > b {" || a.New != "" || a.Why != "w" || a.Line != 3 {
		t.Errorf("first record %+v", a)
	}
	if b.Old != "\treturn -x\n" || b.New != `"not" a literal` || b.Equivalent != "same" || b.Line != 10 {
		t.Errorf("second record %+v", b)
	}
}

func TestParseListErrors(t *testing.T) {
	rec := "name: a\npackage: ./x\nfile: x.go\nold: o\nnew: n\n"
	tests := []struct{ name, src, says string }{
		{"unknown key", "name: a\ncolour: red\n", `list:2: want "key: value"`},
		{"no colon", "name a\n", "list:1:"},
		{"missing old", "name: a\npackage: ./x\nfile: x.go\n", "list:1: record has no old"},
		{"same text", "name: a\npackage: ./x\nfile: x.go\nold: o\nnew: o\n", "old and new are the same"},
		{"key twice", "name: a\nname: b\n", "list:2: name given twice"},
		{"absolute file", strings.Replace(rec, "x.go", "/etc/x.go", 1), "relative to the module root"},
		{"escaping file", strings.Replace(rec, "x.go", "../x.go", 1), "relative to the module root"},
		{"bad package", strings.Replace(rec, "./x", "riffle/x", 1), "want a relative pattern"},
		{"duplicate name", rec + "\n" + rec, "list:7: mutation name a already used at line 1"},
	}
	for _, tc := range tests {
		_, err := ParseList(strings.NewReader(tc.src), "list")
		if err == nil || !strings.Contains(err.Error(), tc.says) {
			t.Errorf("%s: error %v, want one saying %q", tc.name, err, tc.says)
		}
	}
}

// FuzzParseList: any input parses or fails with an error, and every
// mutation parsed has the required fields.
func FuzzParseList(f *testing.F) {
	f.Add("name: a\npackage: ./x\nfile: x.go\nold: o\nnew: n\n")
	f.Add("name: a\nold: \"\\t\"\n\n# c\nname: b\n")
	f.Fuzz(func(t *testing.T, src string) {
		ms, err := ParseList(strings.NewReader(src), "fuzz")
		if err != nil {
			return
		}
		for _, m := range ms {
			if m.Name == "" || m.File == "" || m.Old == "" || len(m.Packages) == 0 || m.Old == m.New {
				t.Errorf("parsed an incomplete mutation %+v", m)
			}
		}
	})
}
