package main

import (
	"bufio"
	"context"
	"fmt"
	"io"
	"net"
	"net/url"
	"os"
	"os/exec"
	"strconv"
	"strings"
	"sync"
	"time"
)

// childFlag is the hidden first argument that makes the bench binary run
// one of its child roles (backends, fanout, riffle) instead of the bench.
// It is not registered with the flag set, so it does not show in -h.
const childFlag = "--child-role"

// child is a running child process of the bench, seen from the parent.
//
// The protocol is small: the child prints one line on stdout, either
// "ready URL..." with the base URLs it serves, or "fail MESSAGE"; it then
// serves until its stdin reaches end of file, shuts down and exits 0.
// Closing stdin is the stop signal, so a child also stops when the parent
// dies.
type child struct {
	role  string
	cmd   *exec.Cmd
	stdin io.WriteCloser
	urls  []string
	tail  *tail
	done  chan struct{} // closed once cmd.Wait has returned
	err   error         // cmd.Wait's result, valid after done
}

// startChild re-executes exe in role with args and waits up to wait for
// its ready line.
func startChild(ctx context.Context, exe, role string, args []string, wait time.Duration) (*child, error) {
	cmd := exec.Command(exe, append([]string{childFlag, role}, args...)...)
	c := &child{role: role, cmd: cmd, tail: &tail{max: 4 << 10}, done: make(chan struct{})}
	cmd.Stderr = c.tail
	stdin, err := cmd.StdinPipe()
	if err != nil {
		return nil, fmt.Errorf("bench: %s child: stdin: %w", role, err)
	}
	stdout, err := cmd.StdoutPipe()
	if err != nil {
		return nil, fmt.Errorf("bench: %s child: stdout: %w", role, err)
	}
	if err := cmd.Start(); err != nil {
		return nil, fmt.Errorf("bench: start %s child: %w: %w", role, errChild, err)
	}
	c.stdin = stdin
	lines := make(chan string, 1)
	go func() {
		r := bufio.NewReader(stdout)
		line, _ := r.ReadString('\n')
		lines <- line
		_, _ = io.Copy(io.Discard, r)
		c.err = cmd.Wait()
		close(c.done)
	}()
	timer := time.NewTimer(wait)
	defer timer.Stop()
	select {
	case line := <-lines:
		if c.urls, err = parseReady(line); err == nil {
			return c, nil
		}
	case <-timer.C:
		err = fmt.Errorf("no ready line within %v: %w", wait, errChild)
	case <-ctx.Done():
		err = ctx.Err()
	}
	_ = c.stop(2 * time.Second)
	return nil, fmt.Errorf("bench: %s child: %w%s", role, err, c.tail.suffix())
}

// stop closes the child's stdin and waits up to grace for it to exit,
// killing it after that. It reports a kill or a non-zero exit.
func (c *child) stop(grace time.Duration) error {
	_ = c.stdin.Close()
	timer := time.NewTimer(grace)
	defer timer.Stop()
	select {
	case <-c.done:
	case <-timer.C:
		_ = c.cmd.Process.Kill()
		<-c.done
		return fmt.Errorf("bench: %s child did not stop within %v, killed: %w", c.role, grace, errChild)
	}
	if c.err != nil {
		return fmt.Errorf("bench: %s child: %w: %w%s", c.role, errChild, c.err, c.tail.suffix())
	}
	return nil
}

// peakRSS returns the child's peak resident set size in MiB.
func (c *child) peakRSS() (float64, error) {
	f, err := os.Open("/proc/" + strconv.Itoa(c.cmd.Process.Pid) + "/status")
	if err != nil {
		return 0, fmt.Errorf("bench: %s child peak RSS: %w", c.role, err)
	}
	defer f.Close()
	kib, err := parseVmHWM(f)
	if err != nil {
		return 0, fmt.Errorf("bench: %s child peak RSS: %w", c.role, err)
	}
	return float64(kib) / 1024, nil
}

// parseReady parses a child's first line. A ready line lists one or more
// base URLs, each http on a loopback address with a port; a fail line
// carries the child's reason.
func parseReady(line string) ([]string, error) {
	line = strings.TrimRight(line, "\r\n")
	word, rest, _ := strings.Cut(line, " ")
	switch word {
	case "fail":
		return nil, fmt.Errorf("%w: %s", errChild, rest)
	case "ready":
	default:
		return nil, fmt.Errorf("%w: %q", errReadyLine, line)
	}
	urls := strings.Fields(rest)
	if len(urls) == 0 {
		return nil, fmt.Errorf("%w: no URL in %q", errReadyLine, line)
	}
	for _, s := range urls {
		if err := checkLoopbackURL(s); err != nil {
			return nil, fmt.Errorf("%w: %w", errReadyLine, err)
		}
	}
	return urls, nil
}

// checkLoopbackURL accepts exactly http://IP:PORT with a loopback IP: the
// bench only ever loads its own processes on this machine.
func checkLoopbackURL(s string) error {
	u, err := url.Parse(s)
	if err != nil {
		return fmt.Errorf("URL %q: %w", s, err)
	}
	if u.Scheme != "http" || u.Path != "" || u.RawQuery != "" || u.User != nil || u.Fragment != "" {
		return fmt.Errorf("URL %q is not of the form http://IP:PORT", s)
	}
	host, port, err := net.SplitHostPort(u.Host)
	if err != nil {
		return fmt.Errorf("URL %q: %w", s, err)
	}
	ip := net.ParseIP(host)
	if ip == nil || !ip.IsLoopback() {
		return fmt.Errorf("URL %q is not on a loopback address", s)
	}
	if n, err := strconv.Atoi(port); err != nil || n < 1 || n > 65535 {
		return fmt.Errorf("URL %q has no valid port", s)
	}
	return nil
}

// parseVmHWM reads the "VmHWM:  N kB" line of a /proc/<pid>/status text,
// the peak resident set size (proc(5)), and returns N in KiB.
func parseVmHWM(r io.Reader) (int64, error) {
	sc := bufio.NewScanner(r)
	for sc.Scan() {
		rest, ok := strings.CutPrefix(sc.Text(), "VmHWM:")
		if !ok {
			continue
		}
		f := strings.Fields(rest)
		if len(f) != 2 || f[1] != "kB" {
			return 0, fmt.Errorf("VmHWM line %q: want \"N kB\"", sc.Text())
		}
		n, err := strconv.ParseInt(f[0], 10, 64)
		if err != nil || n < 0 {
			return 0, fmt.Errorf("VmHWM line %q: bad number", sc.Text())
		}
		return n, nil
	}
	if err := sc.Err(); err != nil {
		return 0, fmt.Errorf("read status: %w", err)
	}
	return 0, errNoPeak
}

// tail keeps the last max bytes written to it: a child's stderr, quoted
// when the child fails.
type tail struct {
	mu  sync.Mutex
	max int
	buf []byte
}

// Write implements io.Writer.
func (t *tail) Write(p []byte) (int, error) {
	t.mu.Lock()
	defer t.mu.Unlock()
	t.buf = append(t.buf, p...)
	if over := len(t.buf) - t.max; over > 0 {
		t.buf = append(t.buf[:0], t.buf[over:]...)
	}
	return len(p), nil
}

// suffix returns the kept text as "; stderr: ..." or "" when empty.
func (t *tail) suffix() string {
	t.mu.Lock()
	defer t.mu.Unlock()
	s := strings.TrimSpace(string(t.buf))
	if s == "" {
		return ""
	}
	return "; stderr: " + s
}
