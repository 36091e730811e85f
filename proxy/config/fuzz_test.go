package config

import (
	"os"
	"path/filepath"
	"testing"

	"github.com/goccy/go-yaml"
)

// FuzzParse checks that Parse never panics, that every failure is an
// *Error with at least one problem, and that a valid config survives a
// round trip: encoded back to YAML and parsed again, it is valid and has
// the same Hash.
func FuzzParse(f *testing.F) {
	seeds, _ := filepath.Glob(filepath.Join("testdata", "*.yaml"))
	seeds = append(seeds, filepath.Join("..", "..", "deploy", "riffle.yaml"))
	for _, s := range seeds {
		data, err := os.ReadFile(s)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
	}
	for _, s := range []string{"", "{}", "[]", "~", "listen: [", "experiment: {events: {a: .nan}}", "routes: [{path: '/{a:[}'}]", "a: &x [*x]"} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		c, err := Parse(data, "fuzz.yaml")
		if err != nil {
			if ps := problemsOf(t, err); len(ps) == 0 {
				t.Fatalf("error with no problems: %v", err)
			}
			return
		}
		out, err := yaml.Marshal(c)
		if err != nil {
			t.Fatalf("Marshal of a valid config: %v", err)
		}
		back, err := Parse(out, "round-trip.yaml")
		if err != nil {
			t.Fatalf("round trip: %v\ninput:\n%s\nencoded:\n%s", err, data, out)
		}
		if a, b := c.Hash(), back.Hash(); a != b {
			t.Fatalf("round trip changed the hash from %s to %s\nencoded:\n%s", a, b, out)
		}
	})
}
