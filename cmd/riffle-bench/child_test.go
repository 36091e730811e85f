package main

import (
	"context"
	"errors"
	"os"
	"strings"
	"testing"
	"time"
)

func TestParseReady(t *testing.T) {
	tests := []struct {
		line    string
		want    []string
		wantErr error
	}{
		{"ready http://127.0.0.1:7001\n", []string{"http://127.0.0.1:7001"}, nil},
		{"ready http://127.0.0.1:7001 http://[::1]:7002\r\n", []string{"http://127.0.0.1:7001", "http://[::1]:7002"}, nil},
		{"fail sidecar: not assembled yet\n", nil, errChild},
		{"", nil, errReadyLine},
		{"ready\n", nil, errReadyLine},
		{"ready http://10.0.0.1:80\n", nil, errReadyLine},               // not loopback
		{"ready https://127.0.0.1:443\n", nil, errReadyLine},            // not http
		{"ready http://127.0.0.1\n", nil, errReadyLine},                 // no port
		{"ready http://127.0.0.1:0\n", nil, errReadyLine},               // no valid port
		{"ready http://127.0.0.1:70000\n", nil, errReadyLine},           // no valid port
		{"ready http://127.0.0.1:80/v1/recommend\n", nil, errReadyLine}, // a path
		{"ready http://localhost:80\n", nil, errReadyLine},              // a name, not an IP
		{"READY http://127.0.0.1:80\n", nil, errReadyLine},
	}
	for _, tt := range tests {
		got, err := parseReady(tt.line)
		if !errors.Is(err, tt.wantErr) || strings.Join(got, " ") != strings.Join(tt.want, " ") {
			t.Errorf("parseReady(%q): got %v, %v; want %v, %v", tt.line, got, err, tt.want, tt.wantErr)
		}
	}
	if _, err := parseReady("fail port in use\n"); err == nil || !strings.Contains(err.Error(), "port in use") {
		t.Errorf("fail line: got %v, want the child's reason in the error", err)
	}
}

func FuzzParseReady(f *testing.F) {
	for _, s := range []string{"ready http://127.0.0.1:7001\n", "ready http://[::1]:1 http://127.0.0.2:2", "fail x", "ready ::", "ready http://127.0.0.1:%zz"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, line string) {
		urls, err := parseReady(line)
		if err != nil {
			if !errors.Is(err, errChild) && !errors.Is(err, errReadyLine) {
				t.Errorf("parseReady(%q): error %v is neither errChild nor errReadyLine", line, err)
			}
			return
		}
		if len(urls) == 0 {
			t.Errorf("parseReady(%q): no error and no URL", line)
		}
		for _, u := range urls {
			if err := checkLoopbackURL(u); err != nil {
				t.Errorf("parseReady(%q) accepted %q: %v", line, u, err)
			}
		}
	})
}

// statusSample is the shape of /proc/<pid>/status as proc(5) documents
// it: "Name:\tvalue" lines, sizes in kB.
const statusSample = "Name:\triffle-bench\nState:\tS (sleeping)\nVmPeak:\t 1266440 kB\nVmSize:\t 1266440 kB\nVmHWM:\t   23456 kB\nVmRSS:\t   20112 kB\nThreads:\t8\n"

func TestParseVmHWM(t *testing.T) {
	tests := []struct {
		in      string
		want    int64
		wantErr error
	}{
		{statusSample, 23456, nil},
		{"VmHWM:\t0 kB\n", 0, nil},
		{"Name:\tx\nVmRSS:\t1 kB\n", 0, errNoPeak},
		{"", 0, errNoPeak},
	}
	for _, tt := range tests {
		got, err := parseVmHWM(strings.NewReader(tt.in))
		if got != tt.want || !errors.Is(err, tt.wantErr) {
			t.Errorf("parseVmHWM(%q): got %d, %v; want %d, %v", tt.in, got, err, tt.want, tt.wantErr)
		}
	}
	for _, bad := range []string{"VmHWM:\t12 MB\n", "VmHWM:\tx kB\n", "VmHWM:\t-5 kB\n", "VmHWM:\n"} {
		if _, err := parseVmHWM(strings.NewReader(bad)); err == nil || !strings.Contains(err.Error(), "VmHWM line") {
			t.Errorf("parseVmHWM(%q): got %v, want an error quoting the VmHWM line", bad, err)
		}
	}
}

// TestParseVmHWMSelf reads this process's own status, the real format.
func TestParseVmHWMSelf(t *testing.T) {
	f, err := os.Open("/proc/self/status")
	if err != nil {
		t.Skipf("no /proc on this system: %v", err)
	}
	defer f.Close()
	kib, err := parseVmHWM(f)
	if err != nil || kib <= 0 {
		t.Errorf("own VmHWM: got %d, %v; want a positive size", kib, err)
	}
}

func FuzzParseVmHWM(f *testing.F) {
	f.Add(statusSample)
	f.Add("VmHWM: 1 kB")
	f.Add("VmHWM:\t99999999999999999999 kB\n")
	f.Fuzz(func(t *testing.T, s string) {
		n, err := parseVmHWM(strings.NewReader(s))
		if err == nil && n < 0 {
			t.Errorf("parseVmHWM(%q) = %d with no error, want a size >= 0", s, n)
		}
	})
}

func TestTail(t *testing.T) {
	tl := &tail{max: 8}
	tl.Write([]byte("hello "))
	tl.Write([]byte("world\n"))
	if got, want := tl.suffix(), "; stderr: o world"; got != want {
		t.Errorf("got %q, want %q (the last 8 bytes, trimmed)", got, want)
	}
	if got := (&tail{max: 8}).suffix(); got != "" {
		t.Errorf("empty tail: got %q, want \"\"", got)
	}
}

// TestChildBackends starts the backends role as a real child process (the
// test binary re-executed, see TestMain), loads both backends once, reads
// the child's peak RSS and stops it.
func TestChildBackends(t *testing.T) {
	exe, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	c, err := startChild(ctx, exe, "backends", []string{"-latency", "0s"}, 30*time.Second)
	if err != nil {
		t.Fatal(err)
	}
	if len(c.urls) != 2 {
		t.Fatalf("got URLs %v, want two", c.urls)
	}
	client := newLoader(c.urls[0], 1).client
	a, _, err := fetch(ctx, client, c.urls[0])
	if err != nil {
		t.Fatal(err)
	}
	b, _, err := fetch(ctx, client, c.urls[1])
	if err != nil {
		t.Fatal(err)
	}
	if a.Model != "incumbent" || b.Model != "challenger" {
		t.Errorf("got models %q and %q, want incumbent then challenger", a.Model, b.Model)
	}
	if rss, err := c.peakRSS(); err != nil || rss <= 0 {
		t.Errorf("peak RSS: got %v MiB, %v; want > 0", rss, err)
	}
	if err := c.stop(10 * time.Second); err != nil {
		t.Errorf("stop: %v", err)
	}
}

func TestChildFails(t *testing.T) {
	exe, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		role string
		args []string
		want string
	}{
		{"no-such-role", nil, `unknown role "no-such-role"`},
		{"fanout", []string{"-incumbent", "http://10.1.2.3:80", "-challenger", "http://127.0.0.1:1"}, "not on a loopback address"},
		{"backends", []string{"-latency", "soon"}, "invalid value"},
	}
	for _, tt := range tests {
		_, err := startChild(context.Background(), exe, tt.role, tt.args, 30*time.Second)
		if !errors.Is(err, errChild) || !strings.Contains(err.Error(), tt.want) {
			t.Errorf("role %s: got %v, want errChild containing %q", tt.role, err, tt.want)
		}
	}
}
