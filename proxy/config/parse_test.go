package config

import (
	"errors"
	"io/fs"
	"os"
	"path/filepath"
	"reflect"
	"regexp"
	"strings"
	"testing"
	"time"
)

// TestParseDefaults checks that an otherwise empty config gets every
// default documented on the fields in config.go and in DESIGN.md's
// Interface section.
func TestParseDefaults(t *testing.T) {
	c := parseOK(t, string(minimal(t)))
	tests := []struct {
		name      string
		got, want any
	}{
		{"listen", c.Listen, "127.0.0.1:8080"},
		{"admin", c.Admin, "127.0.0.1:7464"},
		{"store", c.Store, "riffle.db"},
		{"queue.size", c.Queue.Size, 65536},
		{"queue.batch", c.Queue.Batch, 1024},
		{"queue.interval", c.Queue.Interval, 50 * time.Millisecond},
		{"max_body_bytes", c.MaxBodyBytes, int64(1 << 20)},
		{"on_incumbent_failure", c.OnIncumbentFailure, "fail"},
		{"shutdown_grace", c.ShutdownGrace, 10 * time.Second},
		{"incumbent.timeout", c.Incumbent.Timeout, 200 * time.Millisecond},
		{"challenger.timeout", c.Challenger.Timeout, 200 * time.Millisecond},
		{"routes[0].slots", c.Routes[0].Slots, 0},
		{"experiment.policy", c.Experiment.Policy, "team-draft"},
		{"experiment.tau", c.Experiment.Tau, 3.0}, // Hofmann, Whiteson & de Rijke 2011 use tau = 3
		{"experiment.credit", c.Experiment.Credit, "linear"},
		{"experiment.ramp", *c.Experiment.Ramp, 1.0},
		{"experiment.window", c.Experiment.Window, 30 * time.Minute},
		{"experiment.events", c.Experiment.Events, map[string]float64{"click": 1, "purchase": 3}},
		{"experiment.alpha", c.Experiment.Alpha, 0.05},
		{"experiment.power", c.Experiment.Power, 0.8},
		{"experiment.mde", c.Experiment.MDE, 0.02},
		{"experiment.margin", c.Experiment.Margin, 0.0},
		{"experiment.debias.eta", c.Experiment.Debias.Eta, 0.0},
		{"experiment.guardrails.window", c.Experiment.Guardrails.Window, time.Minute},
		{"experiment.guardrails.min_requests", c.Experiment.Guardrails.MinRequests, 100},
		{"pprof", c.Pprof, false},
	}
	for _, tt := range tests {
		if !reflect.DeepEqual(tt.got, tt.want) {
			t.Errorf("%s: got %v, want %v", tt.name, tt.got, tt.want)
		}
	}
}

// TestParseRampDefaultWithSchedule checks the decided default: with a
// schedule and no ramp, nobody is interleaved before the first stage.
func TestParseRampDefaultWithSchedule(t *testing.T) {
	src := strings.Replace(string(minimal(t)), "experiment: {name: spring-refresh}",
		"experiment: {name: spring-refresh, schedule: [{after: 1h, ramp: 0.5}]}", 1)
	c := parseOK(t, src)
	if got := *c.Experiment.Ramp; got != 0 {
		t.Errorf("ramp with a schedule and no ramp: got %v, want 0", got)
	}
}

func TestParseKeepsGivenValues(t *testing.T) {
	src := strings.Replace(string(minimal(t)), "experiment: {name: spring-refresh}", `experiment:
  name: spring-refresh
  ramp: 0
  start: 2026-04-01T08:00:00+02:00
  events: {add_to_basket: 2}
listen: "[::1]:8081"
queue: {interval: 1.5s}`, 1)
	c := parseOK(t, src)
	if got := *c.Experiment.Ramp; got != 0 {
		t.Errorf("explicit ramp 0: got %v, want 0", got)
	}
	if want := time.Date(2026, 4, 1, 6, 0, 0, 0, time.UTC); !c.Experiment.Start.Equal(want) || c.Experiment.Start.Location() != time.UTC {
		t.Errorf("start: got %v, want %v in UTC", c.Experiment.Start, want)
	}
	if got, want := c.Experiment.Events, map[string]float64{"add_to_basket": 2}; !reflect.DeepEqual(got, want) {
		t.Errorf("events: got %v, want %v (given events replace the default set)", got, want)
	}
	if c.Listen != "[::1]:8081" || c.Queue.Interval != 1500*time.Millisecond {
		t.Errorf("listen, queue.interval: got %q, %v", c.Listen, c.Queue.Interval)
	}
}

// TestParseUnknownKeys checks that every unknown key is reported at once,
// with its key path, name and line.
func TestParseUnknownKeys(t *testing.T) {
	data, err := os.ReadFile(filepath.Join("testdata", "bad-unknown.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	_, err = Parse(data, "bad-unknown.yaml")
	got := problemsOf(t, err)
	want := []Problem{
		{Path: "lisen", Message: `unknown key "lisen" (did you mean "listen"?)`, Line: 2},
		{Path: "incumbent.timout", Message: `unknown key "timout" (did you mean "timeout"?)`, Line: 3},
		{Path: "routes[0].lenght", Message: `unknown key "lenght"`, Line: 6},
		{Path: "experiment.rampup", Message: `unknown key "rampup" (did you mean "ramp"?)`, Line: 10},
		{Path: "experiment.guardrails.p99", Message: `unknown key "p99"`, Line: 11},
	}
	if !reflect.DeepEqual(got, want) {
		t.Errorf("got%s\nwant%s", strs(got), strs(want))
	}
	if !errors.Is(err, ErrInvalid) || errors.Is(err, ErrNeedsRestart) {
		t.Errorf("errors.Is: got ErrInvalid=%v ErrNeedsRestart=%v, want true, false",
			errors.Is(err, ErrInvalid), errors.Is(err, ErrNeedsRestart))
	}
}

func TestParseWrongKinds(t *testing.T) {
	tests := []struct {
		src, path, msg string
	}{
		{"incumbent: {url: http://a:1, timeout: 200}", "incumbent.timeout", `200 is not a duration; write a number with a unit, e.g. "200ms" or "1h30m"`},
		{"incumbent: {url: http://a:1, timeout: soon}", "incumbent.timeout", `"soon" is not a duration; write a number with a unit, e.g. "200ms" or "1h30m"`},
		{"routes: [{path: /a, slots: ten}]", "routes[0].slots", `"ten" is not a whole number`},
		{"routes: [{path: /a, slots: 1.5}]", "routes[0].slots", `1.5 is not a whole number`},
		{"routes: [{path: /a, slots: 99999999999999999999}]", "routes[0].slots", `99999999999999999999 is too large`},
		{"routes: {path: /a}", "routes", `must be a list, not a mapping`},
		{"user: {header: [a]}", "user.header", `a list is not text; put it in quotes if it is meant as text`},
		{"listen: 8080", "listen", `8080 is not text; put it in quotes if it is meant as text`},
		{"pprof: maybe", "pprof", `"maybe" is not true or false`},
		{"experiment: {ramp: half}", "experiment.ramp", `"half" is not a number`},
		{"experiment: {start: next tuesday}", "experiment.start", `"next tuesday" is not an RFC 3339 time, e.g. "2026-04-01T09:00:00Z"`},
		{"experiment: {start: 2026-04-01}", "experiment.start", `"2026-04-01" is not an RFC 3339 time, e.g. "2026-04-01T09:00:00Z"`},
		{"experiment: {events: [click]}", "experiment.events", `must be a mapping of keys to values, not a list`},
		{"experiment: {events: {click: lots}}", "experiment.events.click", `"lots" is not a number`},
		{"experiment: 5", "experiment", `must be a mapping of keys to values, not 5`},
	}
	for _, tt := range tests {
		t.Run(tt.path, func(t *testing.T) {
			_, err := Parse([]byte(tt.src), "t.yaml")
			got := problemsOf(t, err)
			if len(got) != 1 || got[0].Path != tt.path || got[0].Message != tt.msg || got[0].Line != 1 {
				t.Errorf("got%s\nwant\n\t%s: %s (line 1)", strs(got), tt.path, tt.msg)
			}
		})
	}
}

func TestParseYAMLErrors(t *testing.T) {
	tests := []struct {
		file string
		line int
		msg  string // a regular expression
	}{
		{"bad-yaml.yaml", 5, `^invalid YAML: ',' or '}' must be specified$`},
		{"bad-duplicate.yaml", 7, `^invalid YAML: mapping key "incumbent" already defined at \[2:1\]$`},
	}
	for _, tt := range tests {
		t.Run(tt.file, func(t *testing.T) {
			_, err := Load(filepath.Join("testdata", tt.file))
			got := problemsOf(t, err)
			if len(got) != 1 || got[0].Line != tt.line || !regexp.MustCompile(tt.msg).MatchString(got[0].Message) {
				t.Errorf("got%s\nwant line %d matching %s", strs(got), tt.line, tt.msg)
			}
		})
	}
	_, err := Parse([]byte("listen: a:1\n---\nadmin: b:2\n"), "two.yaml")
	if got := problemsOf(t, err); len(got) != 1 || got[0].Message != "the file holds 2 YAML documents; riffle reads exactly one" || got[0].Line != 3 {
		t.Errorf("two documents: got%s", strs(got))
	}
}

// TestParseAliases checks that YAML anchors and aliases, which the schema
// walk leaves to the decoder, still decode and are still strict.
func TestParseAliases(t *testing.T) {
	src := strings.Replace(string(minimal(t)), `challenger: {url: "http://127.0.0.1:7002"}`,
		"model: &m {url: \"http://127.0.0.1:7002\", timeout: 300ms}\nchallenger: *m", 1)
	_, err := Parse([]byte(src), "t.yaml")
	if got := problemsOf(t, err); len(got) != 1 || got[0].Path != "model" {
		t.Fatalf("unknown anchor holder: got%s", strs(got))
	}
	src = strings.Replace(string(minimal(t)), `challenger: {url: "http://127.0.0.1:7002"}`,
		"challenger: &m {url: \"http://127.0.0.1:7002\", timeout: 300ms}\nincumbent: *m", 1)
	src = strings.Replace(src, `incumbent: {url: "http://127.0.0.1:7001"}`+"\n", "", 1)
	c := parseOK(t, src)
	if c.Incumbent != c.Challenger || c.Incumbent.Timeout != 300*time.Millisecond {
		t.Errorf("alias: got incumbent %+v, challenger %+v, want both {http://127.0.0.1:7002 300ms}", c.Incumbent, c.Challenger)
	}
	bad := strings.Replace(src, "timeout: 300ms}", "timeout: 300ms, retries: 2}", 1)
	_, err = Parse([]byte(bad), "t.yaml")
	if got := problemsOf(t, err); len(got) != 1 || got[0].Path != "challenger.retries" {
		t.Errorf("unknown key in an anchored mapping: got%s", strs(got))
	}
}

func TestLoad(t *testing.T) {
	c, err := Load(filepath.Join("testdata", "minimal.yaml"))
	if err != nil || c.Experiment.Name != "spring-refresh" {
		t.Fatalf("Load(minimal.yaml): got %v, %v", c, err)
	}
	_, err = Load(filepath.Join(t.TempDir(), "absent.yaml"))
	if !errors.Is(err, fs.ErrNotExist) || errors.Is(err, ErrInvalid) {
		t.Errorf("Load(absent): got %v, want an fs.ErrNotExist that is not ErrInvalid", err)
	}
}

func TestEmptyFile(t *testing.T) {
	_, err := Parse(nil, "empty.yaml")
	got := problemsOf(t, err)
	want := map[string]bool{"incumbent.url": true, "challenger.url": true, "routes": true, "user": true, "experiment.name": true}
	if len(got) != len(want) {
		t.Errorf("got%s\nwant exactly the required keys %v", strs(got), want)
	}
	for _, p := range got {
		if !want[p.Path] {
			t.Errorf("unexpected problem %s", p)
		}
	}
}

func TestErrorLines(t *testing.T) {
	e := &Error{Source: "r.yaml", Problems: []Problem{
		{Path: "listen", Message: "bad", Line: 2},
		{Path: "routes", Message: "missing"},
		{Message: "whole file", Line: 1},
	}}
	want := "r.yaml:2: listen: bad\nr.yaml: routes: missing\nr.yaml:1: whole file"
	if got := e.Error(); got != want {
		t.Errorf("got\n%s\nwant\n%s", got, want)
	}
	if !errors.Is(e, ErrInvalid) {
		t.Error("errors.Is(*Error, ErrInvalid) = false")
	}
	e.Restart = true
	if !errors.Is(e, ErrNeedsRestart) || errors.Is(e, ErrInvalid) {
		t.Error("a restart *Error must match ErrNeedsRestart and not ErrInvalid")
	}
}

// TestUnknownKeysDoNotHideValueProblems checks that a file with an unknown
// key still has its values checked, so riffle check prints every problem
// at once.
func TestUnknownKeysDoNotHideValueProblems(t *testing.T) {
	src := `colour: green
incumbent: {url: "http://127.0.0.1:7001", timeout: -5ms}
challenger: {url: "http://127.0.0.1:7002"}
routes: [{path: /v1/recommend, list: items, id: /sku}]
user: {header: Shopper-Id}
experiment: {name: spring-refresh, ramp: 2}
`
	_, err := Parse([]byte(src), "t.yaml")
	got := map[string]bool{}
	for _, p := range problemsOf(t, err) {
		got[p.Path] = true
	}
	for _, want := range []string{"colour", "incumbent.timeout", "routes[0].list", "experiment.ramp"} {
		if !got[want] {
			t.Errorf("no problem reported at %s; got %v", want, got)
		}
	}
}
