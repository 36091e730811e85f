package sidecar_test

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"net/http"
	"os"
	"os/exec"
	"os/signal"
	"path/filepath"
	"regexp"
	"sync"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"riffle/proxy/sidecar"
	"riffle/store"
)

// childEnv names the config file when the test binary runs as the
// shutdown test's child process.
const childEnv = "RIFFLE_SIDECAR_SHUTDOWN_CHILD"

// TestShutdownChild is the child process of TestShutdownUnderLoad: it runs
// sidecar.Serve on the config named by childEnv, as `riffle serve` does,
// until SIGTERM, and exits 0 after a clean shutdown. Without the variable
// it does nothing.
func TestShutdownChild(t *testing.T) {
	path := os.Getenv(childEnv)
	if path == "" {
		t.Skip("runs only as the shutdown test's child process")
	}
	ctx, stop := signal.NotifyContext(context.Background(), syscall.SIGTERM, os.Interrupt)
	defer stop()
	if err := sidecar.Serve(ctx, path, os.Stdout); err != nil {
		fmt.Println("CHILD ERROR", err)
		os.Exit(1)
	}
	os.Exit(0)
}

// servingLine is the sidecar's log line that gives its bound addresses.
var servingLine = regexp.MustCompile(`msg="riffle serving" listen=(\S+) admin=(\S+)`)

// child is the sidecar process under test.
type child struct {
	cmd  *exec.Cmd
	data string
	out  *logBuffer
	exit chan error
}

// startChild re-runs the test binary as a sidecar on the config at path
// and waits for it to report its addresses.
func startChild(t *testing.T, path string) *child {
	t.Helper()
	cmd := exec.Command(os.Args[0], "-test.run=^TestShutdownChild$")
	cmd.Env = append(os.Environ(), childEnv+"="+path)
	stdout, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	cmd.Stderr = cmd.Stdout
	if err := cmd.Start(); err != nil {
		t.Fatalf("start child: %v", err)
	}
	ch := &child{cmd: cmd, out: &logBuffer{}, exit: make(chan error, 1)}
	addr := make(chan string, 1)
	go func() {
		sc := bufio.NewScanner(stdout)
		for sc.Scan() {
			fmt.Fprintln(ch.out, sc.Text())
			if m := servingLine.FindStringSubmatch(sc.Text()); m != nil {
				addr <- m[1]
			}
		}
		ch.exit <- cmd.Wait()
	}()
	t.Cleanup(func() {
		_ = cmd.Process.Kill() // a no-op once it has exited
		if t.Failed() {
			t.Logf("child output:\n%s", ch.out.String())
		}
	})
	select {
	case a := <-addr:
		ch.data = "http://" + a
	case err := <-ch.exit:
		t.Fatalf("child exited before serving: %v\n%s", err, ch.out.String())
	case <-time.After(20 * time.Second):
		t.Fatalf("child did not report its addresses within 20s:\n%s", ch.out.String())
	}
	return ch
}

// load is the shutdown test's traffic: workers that ask for
// recommendations, each tagged so that the incumbent can tell which ones
// it is serving, and click the first item of every answer.
type load struct {
	stopped atomic.Bool
	wg      sync.WaitGroup
	mu      sync.Mutex
	answers map[string]answer // by tag
	acked   []store.Event     // feedback answered 202 with the event accepted
}

// run starts workers goroutines that send requests until l.stopped.
func (l *load) run(data string, workers int) {
	l.answers = map[string]answer{}
	for w := range workers {
		l.wg.Add(1)
		go func() {
			defer l.wg.Done()
			for i := 0; !l.stopped.Load(); i++ {
				tag := fmt.Sprintf("w%d-%d", w, i)
				a := recommend(context.Background(), data, fmt.Sprintf("shopper-%d-%d", w, i), "",
					http.Header{"Load-Tag": {tag}})
				l.mu.Lock()
				l.answers[tag] = a
				l.mu.Unlock()
				if a.err != nil || a.status != http.StatusOK || len(a.skus) == 0 || l.stopped.Load() {
					continue
				}
				status, fr, err := postFeedback(context.Background(), data, event(a.impression, a.skus[0], "click"))
				if err == nil && status == http.StatusAccepted && fr.Accepted == 1 {
					id, _ := store.ParseID(a.impression)
					l.mu.Lock()
					l.acked = append(l.acked, store.Event{Impression: id, Item: a.skus[0], Type: "click"})
					l.mu.Unlock()
				}
			}
		}()
	}
}

// inFlight tracks the tags of the requests the incumbent is serving.
type inFlight struct {
	mu   sync.Mutex
	now  map[string]bool
	done bool // the signal was sent: stop tracking
}

// start notes a request arriving at the incumbent.
func (f *inFlight) start(r *http.Request) {
	f.mu.Lock()
	defer f.mu.Unlock()
	if tag := r.Header.Get("Load-Tag"); tag != "" && !f.done {
		f.now[tag] = true
	}
}

// end notes the incumbent answering a request.
func (f *inFlight) end(r *http.Request) {
	f.mu.Lock()
	defer f.mu.Unlock()
	if !f.done {
		delete(f.now, r.Header.Get("Load-Tag"))
	}
}

// TestShutdownUnderLoad sends SIGTERM to a sidecar process while requests
// are in flight at a slow incumbent, and checks that each of them is
// answered in full, that the process exits 0 within its grace period, and
// that the store, reopened, holds every impression served and every
// feedback event acknowledged before the signal.
func TestShutdownUnderLoad(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	flight := &inFlight{now: map[string]bool{}}
	inc := newBackend(t, "incumbent", incumbentShelf, 300*time.Millisecond)
	inc.onStart, inc.onEnd = flight.start, flight.end
	chal := newBackend(t, "challenger", challengerShelf, 0)
	c := newConf(dir, inc.URL, chal.URL)
	c.Grace = 5 * time.Second
	path := filepath.Join(dir, "riffle.yaml")
	writeFile(t, path, c.yaml())
	ch := startChild(t, path)

	l := &load{}
	l.run(ch.data, 8)
	t.Cleanup(func() { l.stopped.Store(true); l.wg.Wait() })
	atSignal, sent := signalUnderLoad(t, ch, l, flight)
	select {
	case err := <-ch.exit:
		if err != nil {
			t.Errorf("child exited with %v after SIGTERM, want exit status 0", err)
		}
	case <-time.After(c.Grace + 5*time.Second):
		t.Fatalf("child still running %s after SIGTERM (grace %s)", c.Grace+5*time.Second, c.Grace)
	}
	took := time.Since(sent)
	if took > c.Grace {
		t.Errorf("child took %s to exit after SIGTERM, more than its grace period %s", took, c.Grace)
	}
	l.wg.Wait()

	for _, tag := range atSignal {
		a := l.answers[tag]
		if a.err != nil || a.status != http.StatusOK || a.impression == "" || len(a.skus) != 10 {
			t.Errorf("request %s, in flight at SIGTERM: status %d, impression %q, %d items, err %v; want a whole 200 answer",
				tag, a.status, a.impression, len(a.skus), a.err)
		}
	}
	checkStoreAfterShutdown(t, c.Store, l)
	t.Logf("%d requests in flight at SIGTERM, %d answers in all, %d events acknowledged; exit %s after the signal",
		len(atSignal), len(l.answers), len(l.acked), took.Round(time.Millisecond))
}

// signalUnderLoad waits until feedback has been acknowledged and requests
// are waiting at the incumbent, stops the load from sending more, and sends
// SIGTERM. It returns the tags of the requests the incumbent was serving
// when the signal was sent, and when that was.
func signalUnderLoad(t *testing.T, ch *child, l *load, flight *inFlight) ([]string, time.Time) {
	t.Helper()
	var atSignal []string
	eventually(t, 20*time.Second, func() (bool, string) {
		l.mu.Lock()
		acked := len(l.acked)
		l.mu.Unlock()
		flight.mu.Lock()
		defer flight.mu.Unlock()
		if acked < 10 || len(flight.now) < 4 {
			return false, fmt.Sprintf("%d events acknowledged and %d requests at the incumbent, want 10 and 4", acked, len(flight.now))
		}
		// Stop tracking and starting requests, then signal: every tag in
		// atSignal was being served when the signal arrived.
		flight.done = true
		l.stopped.Store(true)
		for tag := range flight.now {
			atSignal = append(atSignal, tag)
		}
		return true, ""
	})
	sent := time.Now()
	if err := ch.cmd.Process.Signal(syscall.SIGTERM); err != nil {
		t.Fatalf("SIGTERM: %v", err)
	}
	return atSignal, sent
}

// checkStoreAfterShutdown reopens the store read-only and checks that it
// holds every impression whose answer was served and every acknowledged
// event.
func checkStoreAfterShutdown(t *testing.T, path string, l *load) {
	t.Helper()
	if err := store.Verify(path); err != nil {
		t.Errorf("store.Verify after shutdown: %v", err)
	}
	st, err := store.Open(path, &store.Options{ReadOnly: true})
	if err != nil {
		t.Fatalf("reopen store: %v", err)
	}
	defer st.Close()
	var buf bytes.Buffer
	if err := st.Export(context.Background(), &buf, time.Time{}); err != nil {
		t.Fatalf("export: %v", err)
	}
	events := map[string]map[string]bool{} // impression -> "item event" -> seen
	for sc := bufio.NewScanner(&buf); sc.Scan(); {
		var line struct {
			Impression string
			Events     []struct{ Item, Event string }
		}
		if err := json.Unmarshal(sc.Bytes(), &line); err != nil {
			t.Fatalf("export line %s: %v", sc.Bytes(), err)
		}
		events[line.Impression] = map[string]bool{}
		for _, ev := range line.Events {
			events[line.Impression][ev.Item+" "+ev.Event] = true
		}
	}
	served := 0
	for tag, a := range l.answers {
		if a.status != http.StatusOK {
			continue
		}
		served++
		if events[a.impression] == nil {
			t.Errorf("impression %s (request %s) was served but is not in the store", a.impression, tag)
		}
	}
	for _, ev := range l.acked {
		if !events[ev.Impression.String()][ev.Item+" "+ev.Type] {
			t.Errorf("acknowledged %s of %s on %s is not in the store", ev.Type, ev.Item, ev.Impression)
		}
	}
	if served == 0 || len(l.acked) == 0 {
		t.Errorf("%d answers served and %d events acknowledged: the test checked nothing", served, len(l.acked))
	}
}
