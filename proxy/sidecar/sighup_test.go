package sidecar_test

import (
	"fmt"
	"os"
	"strings"
	"syscall"
	"testing"
	"time"
)

// TestSIGHUPReloads sends a real SIGHUP to the test process and checks that
// the running sidecar reloads its config (a reload of unchanged content
// still applies it, and is counted). It does not call t.Parallel: Go runs
// it while no parallel test's sidecar is up, so no other test sees the
// signal's reload.
func TestSIGHUPReloads(t *testing.T) {
	dir := t.TempDir()
	inc := newBackend(t, "incumbent", incumbentShelf, 0)
	chal := newBackend(t, "challenger", challengerShelf, 0)
	r := start(t, dir, newConf(dir, inc.URL, chal.URL))
	// The SIGHUP handler is installed before Run logs that it serves.
	eventually(t, 5*time.Second, func() (bool, string) {
		return strings.Contains(r.log.String(), `msg="riffle serving"`), "sidecar not serving yet"
	})
	if err := syscall.Kill(os.Getpid(), syscall.SIGHUP); err != nil {
		t.Fatal(err)
	}
	eventually(t, 5*time.Second, func() (bool, string) {
		n := r.scrape(t).value("riffle_config_reloads_total", labels{"result": "success"})
		return n == 1, fmt.Sprintf("riffle_config_reloads_total{result=success} = %v after SIGHUP, want 1", n)
	})
}
