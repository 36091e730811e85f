package main

import (
	"bytes"
	"encoding/json"
	"flag"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// The -update flag rewrites golden files. It is registered only if no
// other test file of the package has registered it already.
func init() {
	if flag.Lookup("update") == nil {
		flag.Bool("update", false, "rewrite the golden files in testdata")
	}
}

func updatingGolden() bool {
	f := flag.Lookup("update")
	return f != nil && f.Value.String() == "true"
}

// checkGolden compares got with testdata/name, or rewrites the file under
// -update.
func checkGolden(t *testing.T, name string, got []byte) {
	t.Helper()
	path := filepath.Join("testdata", name)
	if updatingGolden() {
		if err := os.WriteFile(path, got, 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test -update to create it)", err)
	}
	if strings.HasSuffix(name, ".json") {
		got, want = roundedJSON(t, got), roundedJSON(t, want)
	}
	if !bytes.Equal(got, want) {
		t.Errorf("output differs from %s (go test -update rewrites it)\ngot:\n%s\nwant:\n%s", path, got, want)
	}
}

// roundedJSON re-encodes a JSON document with every number rounded to nine
// significant digits, so that golden files do not depend on the last bits
// of floating point, which may differ between architectures (fused
// multiply-add).
func roundedJSON(t *testing.T, b []byte) []byte {
	t.Helper()
	var v any
	if err := json.Unmarshal(b, &v); err != nil {
		t.Fatalf("golden JSON: %v\n%s", err, b)
	}
	var round func(any) any
	round = func(v any) any {
		switch x := v.(type) {
		case float64:
			r, _ := strconv.ParseFloat(strconv.FormatFloat(x, 'g', 9, 64), 64)
			return r
		case []any:
			for i := range x {
				x[i] = round(x[i])
			}
		case map[string]any:
			for k := range x {
				x[k] = round(x[k])
			}
		}
		return v
	}
	out, err := json.MarshalIndent(round(v), "", "  ")
	if err != nil {
		t.Fatal(err)
	}
	return out
}
