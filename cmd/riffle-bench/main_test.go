package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"flag"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// TestMain lets the test binary stand in for the bench binary: the bench
// re-executes os.Executable() with childFlag for its child roles.
func TestMain(m *testing.M) {
	if len(os.Args) > 1 && os.Args[1] == childFlag {
		os.Exit(runChild(context.Background(), os.Args[2:], os.Stdin, os.Stdout, os.Stderr))
	}
	os.Exit(m.Run())
}

// TestBenchRuns runs the whole bench for about one second of measuring
// (all three modes, one round) and checks the JSON is complete. It proves
// the harness works; it asserts no timing.
func TestBenchRuns(t *testing.T) {
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	var stdout, stderr bytes.Buffer
	profiles := t.TempDir()
	code := run(ctx, []string{"--duration", "1s", "--rounds", "1", "--concurrency", "8", "--profile", profiles, "--json"}, &stdout, &stderr)
	var r struct {
		Date, GoVersion string
		GOMAXPROCS      int `json:"gomaxprocs"`
		NumCPU          int `json:"num_cpu"`
		Settings        struct{ Rate int }
		Modes           map[string]struct {
			ClosedRequests int             `json:"closed_loop_requests"`
			Requests       int             `json:"open_loop_requests"`
			Latency        *map[string]any `json:"latency_ms"`
			PeakRSS        *float64        `json:"peak_rss_mib"`
			Error          string
		}
		Ratios *struct {
			Throughput   *float64           `json:"throughput_riffle_over_fanout"`
			LatencyDelta map[string]float64 `json:"latency_riffle_minus_fanout_ms"`
		}
		Targets []struct{ Name string }
	}
	if err := json.Unmarshal(stdout.Bytes(), &r); err != nil {
		t.Fatalf("run exited %d; stdout is not JSON: %v\nstdout: %s\nstderr: %s", code, err, stdout.String(), stderr.String())
	}
	if r.GOMAXPROCS < 1 || r.NumCPU < 1 || r.Date == "" || r.Settings.Rate < 1 {
		t.Errorf("header: got gomaxprocs %d, num_cpu %d, date %q, rate %d; want all set", r.GOMAXPROCS, r.NumCPU, r.Date, r.Settings.Rate)
	}
	for _, name := range []string{"direct", "fanout"} {
		m, ok := r.Modes[name]
		switch {
		case !ok:
			t.Errorf("mode %s: missing from %v", name, r.Modes)
		case m.Error != "":
			t.Errorf("mode %s failed: %s", name, m.Error)
		case m.ClosedRequests == 0 || m.Requests == 0 || m.Latency == nil:
			t.Errorf("mode %s: got %d closed-loop and %d open-loop requests, latency %v; want both > 0 and latency set",
				name, m.ClosedRequests, m.Requests, m.Latency)
		}
	}
	if p := r.Modes["fanout"].PeakRSS; p == nil || *p <= 0 {
		t.Errorf("fanout peak RSS: got %v, want > 0", p)
	}
	checkProfiles(t, profiles, "fanout")
	if len(r.Targets) != 4 {
		t.Errorf("targets: got %d, want 4", len(r.Targets))
	}
	rif, ok := r.Modes["riffle"]
	if !ok {
		t.Fatalf("mode riffle: missing from the JSON")
	}
	if rif.Error != "" {
		t.Fatalf("mode riffle failed, so the ratios are missing: %s\n"+
			"(while riffle/proxy/sidecar.Serve is still a stub this is expected; the test passes once it is assembled)", rif.Error)
	}
	if code != 0 {
		t.Errorf("exit code: got %d, want 0; stderr: %s", code, stderr.String())
	}
	if rif.ClosedRequests == 0 || rif.Requests == 0 || rif.Latency == nil || rif.PeakRSS == nil {
		t.Errorf("mode riffle: got %d closed-loop, %d open-loop requests, latency %v, RSS %v; want all set",
			rif.ClosedRequests, rif.Requests, rif.Latency, rif.PeakRSS)
	}
	checkProfiles(t, profiles, "riffle")
	if r.Ratios == nil || r.Ratios.Throughput == nil || len(r.Ratios.LatencyDelta) != 4 {
		t.Errorf("ratios: got %+v, want the throughput ratio and four latency deltas", r.Ratios)
	}
}

func TestParseFlags(t *testing.T) {
	tests := []struct {
		args []string
		want string // "" = valid; otherwise a piece of the error
	}{
		{nil, ""},
		{[]string{"--duration", "10s", "--rate", "500", "--json"}, ""},
		{[]string{"--duration", "10ms"}, "--duration 10ms"},
		{[]string{"--rate", "-1"}, "--rate -1"},
		{[]string{"--concurrency", "0"}, "--concurrency 0"},
		{[]string{"--latency", "300ms"}, "--timeout 200ms: must exceed --latency 300ms"},
		{[]string{"--rounds", "0"}, "--rounds 0"},
		{[]string{"extra"}, `unexpected argument "extra"`},
	}
	for _, tt := range tests {
		t.Run(strings.Join(tt.args, " "), func(t *testing.T) {
			var stderr bytes.Buffer
			o, err := parseFlags(tt.args, &stderr)
			if tt.want == "" {
				if err != nil {
					t.Fatalf("got error %v, want none", err)
				}
				if o.concurrency != 32 || o.latency != 5*time.Millisecond {
					t.Errorf("defaults: got concurrency %d latency %v, want 32 and 5ms", o.concurrency, o.latency)
				}
				return
			}
			if err == nil || !strings.Contains(err.Error(), tt.want) || !errors.Is(err, errUsage) {
				t.Errorf("got error %v, want errUsage containing %q", err, tt.want)
			}
		})
	}
}

func TestRunExitCodes(t *testing.T) {
	tests := []struct {
		args []string
		want int
	}{
		{[]string{"-h"}, 0},
		{[]string{"--rounds", "x"}, 2},
		{[]string{"--concurrency", "-3"}, 2},
	}
	for _, tt := range tests {
		var stdout, stderr bytes.Buffer
		if got := run(context.Background(), tt.args, &stdout, &stderr); got != tt.want {
			t.Errorf("run %v: got exit %d, want %d; stderr %s", tt.args, got, tt.want, stderr.String())
		}
	}
	var stderr bytes.Buffer
	if _, err := parseFlags([]string{"-h"}, &stderr); !errors.Is(err, flag.ErrHelp) {
		t.Errorf("-h: got %v, want flag.ErrHelp", err)
	}
	if strings.Contains(stderr.String(), childFlag) {
		t.Errorf("usage shows the hidden %s flag:\n%s", childFlag, stderr.String())
	}
}

// checkProfiles checks that a proxy child wrote its CPU and heap profiles:
// runtime/pprof writes gzip-compressed protocol buffers, and a gzip member
// starts with the bytes 0x1f 0x8b (RFC 1952 section 2.3.1).
func checkProfiles(t *testing.T, dir, role string) {
	t.Helper()
	for _, kind := range []string{"cpu", "heap"} {
		b, err := os.ReadFile(filepath.Join(dir, role+"-"+kind+".pprof"))
		if err != nil || len(b) < 2 || b[0] != 0x1f || b[1] != 0x8b {
			t.Errorf("%s %s profile: got %d bytes, %v; want a gzip file", role, kind, len(b), err)
		}
	}
}
