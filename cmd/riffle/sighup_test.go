package main

import (
	"bufio"
	"bytes"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

// TestMain lets the test binary stand in for the riffle binary: with
// RIFFLE_TEST_MAIN=1 it runs main with the arguments after "--".
func TestMain(m *testing.M) {
	if os.Getenv("RIFFLE_TEST_MAIN") == "1" {
		// Every package is initialised here, as in the riffle binary when
		// main starts: tell the parent, whose SIGHUPs may start now.
		_, _ = os.Stdout.WriteString("initialised\n")
		for i, a := range os.Args {
			if a == "--" {
				os.Args = append([]string{os.Args[0]}, os.Args[i+1:]...)
				break
			}
		}
		main()
	}
	os.Exit(m.Run())
}

// TestSIGHUPDuringStartup starts `riffle serve` in its own process and
// sends SIGHUP every half millisecond from the moment its packages are
// initialised (where main starts) until it serves. Before SIGHUP was
// subscribed first, a signal in the 5-20 ms of start-up (config, store,
// listeners) ended the process (exit by signal, 129 from a shell); the
// process must survive every signal and stop cleanly on SIGTERM.
func TestSIGHUPDuringStartup(t *testing.T) {
	if testing.Short() {
		t.Skip("process test skipped in -short mode")
	}
	dir := t.TempDir()
	cfgPath := filepath.Join(dir, "riffle.yaml")
	cfg := strings.NewReplacer("INCUMBENT_URL", "http://127.0.0.1:9", "CHALLENGER_URL", "http://127.0.0.1:9",
		"STORE_PATH", filepath.Join(dir, "riffle.db")).Replace(string(fixture(t, "riffle.yaml")))
	if err := os.WriteFile(cfgPath, []byte(cfg), 0o600); err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(os.Args[0], "-test.run=^$", "--", "serve", "--config", cfgPath)
	cmd.Env = append(os.Environ(), "RIFFLE_TEST_MAIN=1")
	var logs lockedBuffer
	cmd.Stderr = &logs
	stdout, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	if _, err := bufio.NewReader(stdout).ReadString('\n'); err != nil {
		_ = cmd.Process.Kill()
		t.Fatalf("child did not start: %v", err)
	}
	exited := make(chan error, 1)
	go func() { exited <- cmd.Wait() }()
	sent := 0
	for deadline := time.Now().Add(10 * time.Second); !strings.Contains(logs.String(), "riffle serving"); sent++ {
		if time.Now().After(deadline) {
			t.Fatalf("riffle serve did not start: %s", logs.String())
		}
		select {
		case err := <-exited:
			t.Fatalf("riffle serve ended after %d SIGHUPs during start-up: %v\n%s", sent, err, logs.String())
		default:
		}
		_ = cmd.Process.Signal(syscall.SIGHUP)
		time.Sleep(500 * time.Microsecond)
	}
	_ = cmd.Process.Signal(syscall.SIGTERM)
	select {
	case err := <-exited:
		if err != nil {
			t.Fatalf("riffle serve after %d SIGHUPs: %v\n%s", sent, err, logs.String())
		}
	case <-time.After(15 * time.Second):
		_ = cmd.Process.Kill()
		t.Fatal("riffle serve did not stop within 15s of SIGTERM")
	}
	if sent == 0 || !bytes.Contains([]byte(logs.String()), []byte("riffle stopped")) {
		t.Fatalf("sent %d SIGHUPs; log: %s", sent, logs.String())
	}
	t.Logf("%d SIGHUPs during start-up survived", sent)
}
