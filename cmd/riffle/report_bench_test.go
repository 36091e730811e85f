package main

import (
	"bytes"
	"context"
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime/debug"
	"strconv"
	"strings"
	"testing"
	"time"
)

// BenchmarkReportMillion times riffle report over one store of 1,000,000
// interleaved impressions with feedback from 100,000 shoppers, 20 a second.
// Writing the store takes most of the benchmark's wall time and is not
// timed. On Linux it also reports the process's peak resident memory while
// reporting (peak-RSS-MB), after returning the setup's memory to the
// system and resetting the high-water mark through /proc/self/clear_refs;
// the figure still holds the test binary's own baseline.
func BenchmarkReportMillion(b *testing.B) {
	path := filepath.Join(b.TempDir(), "million.db")
	r := rand.New(rand.NewPCG(1_000_000, 7))
	imps := plannedTraffic(r, "spring-refresh", 1_000_000, 100_000, 50*time.Millisecond,
		trafficMix{Challenger: 0.44, Incumbent: 0.42, Tie: 0.14})
	writeStore(b, path, imps)
	imps = nil
	debug.FreeOSMemory()
	resetPeakRSS()
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		var errOut bytes.Buffer
		if code := runReport(context.Background(), []string{"--store", path, "--format", "json"}, io.Discard, &errOut); code != 0 {
			b.Fatalf("exit %d: %s", code, errOut.String())
		}
	}
	b.StopTimer()
	if mb, ok := peakRSSMB(); ok {
		b.ReportMetric(mb, "peak-RSS-MB")
	}
}

// resetPeakRSS resets the kernel's resident-set high-water mark (Linux
// proc(5), clear_refs value 5); elsewhere it does nothing.
func resetPeakRSS() {
	_ = os.WriteFile("/proc/self/clear_refs", []byte("5"), 0)
}

// peakRSSMB reads VmHWM from /proc/self/status.
func peakRSSMB() (float64, bool) {
	status, err := os.ReadFile("/proc/self/status")
	if err != nil {
		return 0, false
	}
	for line := range strings.Lines(string(status)) {
		if rest, ok := strings.CutPrefix(line, "VmHWM:"); ok {
			kb, err := strconv.ParseFloat(strings.TrimSuffix(strings.TrimSpace(rest), " kB"), 64)
			return kb / 1024, err == nil
		}
	}
	return 0, false
}
