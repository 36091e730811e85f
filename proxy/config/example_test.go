package config

import (
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"regexp"
	"testing"
	"time"
)

// TestDeployExample checks that deploy/riffle.yaml is valid and shows every
// key riffle knows, either set or in a comment.
func TestDeployExample(t *testing.T) {
	path := filepath.Join("..", "..", "deploy", "riffle.yaml")
	if _, err := Load(path); err != nil {
		t.Fatalf("the example config is invalid:\n%v", err)
	}
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	for _, key := range leafKeys(reflect.TypeFor[Config]()) {
		re := regexp.MustCompile(`(?m)^[ \t#-]*(- )?(\{|[^:\n]*[{,] ?)?` + regexp.QuoteMeta(key) + `:`)
		if !re.Match(data) {
			t.Errorf("deploy/riffle.yaml does not show the key %q", key)
		}
	}
}

// leafKeys lists the YAML key of every field of t, recursively.
func leafKeys(t reflect.Type) []string {
	var keys []string
	for i := range t.NumField() {
		f := t.Field(i)
		keys = append(keys, yamlName(f))
		ft := f.Type
		for ft.Kind() == reflect.Pointer || ft.Kind() == reflect.Slice {
			ft = ft.Elem()
		}
		if ft.Kind() == reflect.Struct && ft != reflect.TypeFor[time.Time]() {
			keys = append(keys, leafKeys(ft)...)
		}
	}
	return keys
}

// ExampleConfig_EffectiveRamp shows a staged ramp: nobody before the first
// stage, then a growing share of shoppers.
func ExampleConfig_EffectiveRamp() {
	c, err := Parse([]byte(`
incumbent: {url: "http://127.0.0.1:7001"}
challenger: {url: "http://127.0.0.1:7002"}
routes: [{path: /v1/recommend, list: /items, id: /sku}]
user: {header: Shopper-Id}
experiment:
  name: seedling-affinity
  schedule:
    - {after: 1h, ramp: 0.05}
    - {after: 24h, ramp: 0.5}
`), "riffle.yaml")
	if err != nil {
		fmt.Println(err)
		return
	}
	start := time.Date(2026, 4, 1, 6, 0, 0, 0, time.UTC)
	for _, h := range []int{0, 1, 23, 24, 100} {
		fmt.Printf("after %3dh: %.2f\n", h, c.EffectiveRamp(start.Add(time.Duration(h)*time.Hour), start))
	}
	// Output:
	// after   0h: 0.00
	// after   1h: 0.05
	// after  23h: 0.05
	// after  24h: 0.50
	// after 100h: 0.50
}

// ExampleParse shows every problem of a file reported at once.
func ExampleParse() {
	_, err := Parse([]byte(`
incumbent: {url: "http://127.0.0.1:7001", timeout: -5s}
challenger: {url: "http://127.0.0.1:7002"}
routes: [{path: /v1/recommend, list: items}]
user: {header: Shopper-Id}
experiment: {name: spring-refresh, ramp: 1.5}
`), "riffle.yaml")
	fmt.Println(err)
	// Output:
	// riffle.yaml:2: incumbent.timeout: -5s must be positive
	// riffle.yaml:4: routes[0].list: "items" is not a JSON pointer (RFC 6901: must be empty or start with "/")
	// riffle.yaml:6: experiment.ramp: 1.5 is outside [0, 1]
}
