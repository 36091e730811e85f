package config

import (
	"math"
	"regexp"
	"strings"
	"testing"
)

func TestHashStable(t *testing.T) {
	base := parseOK(t, string(minimal(t)))
	h := base.Hash()
	if !regexp.MustCompile(`^[0-9a-f]{16}$`).MatchString(h) {
		t.Fatalf("Hash: got %q, want 16 hex digits", h)
	}
	same := map[string]string{
		"block style, other key order, comments": `
experiment:
  name: spring-refresh   # the spring catalogue
user:
  header: Shopper-Id
routes:
  - id: /sku
    list: /items
    path: /v1/recommend
challenger:
  url: http://127.0.0.1:7002
incumbent:
  url: http://127.0.0.1:7001
`,
		"defaults written out": string(minimal(t)) + `listen: 127.0.0.1:8080
store: riffle.db
queue: {size: 65536, batch: 1024, interval: 50ms}
`,
		"durations spelt differently": strings.Replace(string(minimal(t)), `{url: "http://127.0.0.1:7001"}`, `{url: "http://127.0.0.1:7001", timeout: 0.2s}`, 1),
		"explicit ramp 1":             strings.Replace(string(minimal(t)), "{name: spring-refresh}", "{name: spring-refresh, ramp: 1.0}", 1),
	}
	for name, src := range same {
		if got := parseOK(t, src).Hash(); got != h {
			t.Errorf("%s: got hash %s, want %s as for the minimal config", name, got, h)
		}
	}
	// Hash fills defaults itself, so a config built in code hashes alike.
	raw := *base
	raw.Listen, raw.Queue, raw.Experiment.Ramp = "", Queue{}, nil
	if got := raw.Hash(); got != h {
		t.Errorf("hash before defaults: got %s, want %s", got, h)
	}
	z1 := strings.Replace(string(minimal(t)), "{name: spring-refresh}", "{name: spring-refresh, start: 2026-04-01T08:00:00+02:00}", 1)
	z2 := strings.Replace(string(minimal(t)), "{name: spring-refresh}", "{name: spring-refresh, start: 2026-04-01T06:00:00Z}", 1)
	if a, b := parseOK(t, z1).Hash(), parseOK(t, z2).Hash(); a != b {
		t.Errorf("one instant in two time zones: got hashes %s and %s, want equal", a, b)
	}
}

func TestHashChanges(t *testing.T) {
	h := parseOK(t, string(minimal(t))).Hash()
	changes := map[string][2]string{
		"ramp":   {"{name: spring-refresh}", "{name: spring-refresh, ramp: 0.5}"},
		"name":   {"{name: spring-refresh}", "{name: summer-refresh}"},
		"events": {"{name: spring-refresh}", "{name: spring-refresh, events: {click: 1}}"},
		"route":  {"list: /items", "list: /results"},
		"url":    {"7002", "7003"},
		"user":   {"{header: Shopper-Id}", "{query: shopper}"},
	}
	seen := map[string]string{h: "minimal"}
	for name, ch := range changes {
		src := strings.Replace(string(minimal(t)), ch[0], ch[1], 1)
		got := parseOK(t, src).Hash()
		if other, dup := seen[got]; dup {
			t.Errorf("%s: hash %s equals that of %s", name, got, other)
		}
		seen[got] = name
	}
}

// TestHashNaN covers configs JSON cannot encode (a NaN or infinite ramp,
// which YAML can spell and Validate rejects later): Hash must still be a
// fingerprint of the content, so two such configs built separately from
// the same values hash alike, while ones that differ in any field, or in
// which non-finite value they hold, hash apart, and none hashes like the
// same config with a finite ramp.
func TestHashNaN(t *testing.T) {
	with := func(name string, ramp float64) *Config {
		c := parseOK(t, string(minimal(t)))
		c.Experiment.Name, c.Experiment.Ramp = name, ptr(ramp)
		return c
	}
	nan := with("spring-refresh", math.NaN()).Hash()
	if !regexp.MustCompile(`^[0-9a-f]{16}$`).MatchString(nan) {
		t.Fatalf("Hash of a NaN ramp: got %q, want 16 hex digits", nan)
	}
	if again := with("spring-refresh", math.NaN()).Hash(); again != nan {
		t.Errorf("two configs with the same NaN ramp hash %s and %s, want alike", nan, again)
	}
	seen := map[string]string{nan: "NaN ramp"}
	for name, c := range map[string]*Config{
		"NaN ramp, other experiment": with("summer-refresh", math.NaN()),
		"+Inf ramp":                  with("spring-refresh", math.Inf(1)),
		"-Inf ramp":                  with("spring-refresh", math.Inf(-1)),
		"ramp 0.5":                   with("spring-refresh", 0.5),
	} {
		h := c.Hash()
		if other, dup := seen[h]; dup {
			t.Errorf("%s hashes %s, like %s", name, h, other)
		}
		seen[h] = name
	}
}
