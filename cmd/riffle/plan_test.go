package main

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strings"
	"testing"
)

func runCmd(t *testing.T, f func(context.Context, []string, io.Writer, io.Writer) int, args ...string) (int, string, string) {
	t.Helper()
	var out, errOut bytes.Buffer
	code := f(t.Context(), args, &out, &errOut)
	return code, out.String(), errOut.String()
}

func TestPlanGolden(t *testing.T) {
	cases := []struct {
		golden string
		args   []string
	}{
		{"plan_full.txt", []string{"--mde", "0.02", "--traffic", "50000/day", "--feedback-rate", "0.1", "--ramp", "0.5"}},
		{"plan_counts_only.txt", []string{"--mde", "0.05"}},
		{"plan_no_traffic.txt", []string{"--mde", "0.03", "--alpha", "0.01", "--power", "0.9", "--feedback-rate", "0.2"}},
		{"plan_full.json", []string{"--mde", "0.02", "--traffic", "2000/h", "--feedback-rate", "0.08", "--format", "json"}},
	}
	for _, c := range cases {
		t.Run(c.golden, func(t *testing.T) {
			code, out, errOut := runCmd(t, runPlan, c.args...)
			if code != 0 {
				t.Fatalf("riffle plan %v: exit %d: %s", c.args, code, errOut)
			}
			checkGolden(t, c.golden, []byte(out))
		})
	}
}

func TestPlanJSONArithmetic(t *testing.T) {
	code, out, errOut := runCmd(t, runPlan, "--mde", "0.05", "--traffic", "1000/day", "--feedback-rate", "0.3", "--ramp", "0.4", "--format", "json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	var r planResult
	if err := json.Unmarshal([]byte(out), &r); err != nil {
		t.Fatal(err)
	}
	// 783 for 0.5 against 0.55 at alpha 0.05, power 0.8: the textbook
	// one-sample proportion formula (common practice).
	if r.Fixed.WithFeedback != 783 {
		t.Errorf("fixed with_feedback = %d, want 783", r.Fixed.WithFeedback)
	}
	for name, s := range map[string]planSize{"fixed": r.Fixed, "sequential": r.Sequential} {
		il := int64(math.Ceil(float64(s.WithFeedback) / 0.3))
		served := int64(math.Ceil(float64(il) / 0.4))
		if *s.Interleaved != il || *s.Impressions != served || math.Abs(*s.Days-float64(served)/1000) > 1e-12 {
			t.Errorf("%s: %+v: want interleaved %d, impressions %d, days %v", name, s, il, served, float64(served)/1000)
		}
	}
}

func TestPlanBadFlags(t *testing.T) {
	cases := []struct {
		args []string
		want string
	}{
		{nil, "--mde is required"},
		{[]string{"--mde", "0"}, "--mde 0: want a Delta in (0, 0.5)"},
		{[]string{"--mde", "0.5"}, "--mde 0.5"},
		{[]string{"--mde", "0.02", "--alpha", "1"}, "--alpha 1"},
		{[]string{"--mde", "0.02", "--power", "0"}, "--power 0"},
		{[]string{"--mde", "0.02", "--ramp", "1.5"}, "--ramp 1.5"},
		{[]string{"--mde", "0.02", "--feedback-rate", "0"}, "--feedback-rate 0"},
		{[]string{"--mde", "0.02", "--traffic", "lots/day"}, `--traffic: "lots/day"`},
		{[]string{"--mde", "0.02", "--format", "yaml"}, `--format "yaml"`},
		{[]string{"--mde", "x"}, "invalid value"},
		{[]string{"--mde", "0.02", "extra"}, `unexpected argument "extra"`},
	}
	for _, c := range cases {
		code, out, errOut := runCmd(t, runPlan, c.args...)
		if code != 2 || out != "" || !strings.Contains(errOut, c.want) {
			t.Errorf("riffle plan %v: exit %d, stdout %q, stderr %q; want exit 2 and %q", c.args, code, out, errOut, c.want)
		}
	}
}

func TestParseTraffic(t *testing.T) {
	cases := []struct {
		in   string
		want float64 // per day
	}{
		{"50000/day", 50000},
		{"50000", 50000},
		{"50_000/d", 50000},
		{"2000/h", 48000},
		{"2000/hour", 48000},
		{"30/s", 30 * 86400},
		{"10/min", 14400},
		{"7000/week", 1000},
		{"1500/90m", 24000},
		{" 1.5e3 / h ", 36000},
	}
	for _, c := range cases {
		got, err := parseTraffic(c.in)
		if err != nil || math.Abs(got-c.want) > 1e-9*c.want {
			t.Errorf("parseTraffic(%q) = %v, %v; want %v", c.in, got, err, c.want)
		}
	}
	for _, bad := range []string{"", "/day", "-5/day", "0/day", "NaN/day", "Inf/h", "5/fortnight", "5/-1h", "5/0s", "1e308/1ns"} {
		if got, err := parseTraffic(bad); err == nil {
			t.Errorf("parseTraffic(%q) = %v, want an error", bad, got)
		}
	}
}

func FuzzParseTraffic(f *testing.F) {
	for _, s := range []string{"50000/day", "2000/h", "1500/90m", "5", "x/y", "1e400/s", "3/0.5ns", "/"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		got, err := parseTraffic(s)
		if err != nil {
			if !strings.Contains(err.Error(), fmt.Sprintf("%q", s)) {
				t.Fatalf("parseTraffic(%q) error %q does not name the input", s, err)
			}
			return
		}
		if !(got > 0) || math.IsInf(got, 0) {
			t.Fatalf("parseTraffic(%q) = %v without an error; want a finite positive rate", s, got)
		}
	})
}

// 399 impressions with feedback at a feedback rate of 0.57 are exactly 700
// interleaved impressions (399 = 0.57 * 700); in floating point 399/0.57 is
// 700.0000000000001, which a plain ceiling turns into 701.
func TestPlanGuardedCeiling(t *testing.T) {
	code, out, errOut := runCmd(t, runPlan, "--mde", "0.07", "--feedback-rate", "0.57", "--format", "json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	var r planResult
	if err := json.Unmarshal([]byte(out), &r); err != nil {
		t.Fatal(err)
	}
	if r.Fixed.WithFeedback != 399 || *r.Fixed.Interleaved != 700 {
		t.Errorf("fixed: %d with feedback, %d interleaved; want 399 and 700", r.Fixed.WithFeedback, *r.Fixed.Interleaved)
	}
	if _, text, _ := runCmd(t, runPlan, "--mde", "0.07", "--feedback-rate", "0.57"); !strings.Contains(text, " 700 ") {
		t.Errorf("text output lacks 700 interleaved impressions:\n%s", text)
	}
}
