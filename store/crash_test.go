package store_test

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net"
	"net/http"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"riffle/merge"
	"riffle/proxy/feedback"
	"riffle/store"
)

// crashEnv names the store file when the test binary runs as the child.
const crashEnv = "RIFFLE_STORE_CRASH_CHILD"

// crashBatch is the child's group-commit batch size.
const crashBatch = 256

// TestCrashChild is the child process of TestCrashKeepsAcknowledged: it
// serves POST /impress (record n impressions, answer their ids) and POST
// /feedback on loopback until it is killed. Without the variable it does
// nothing.
func TestCrashChild(t *testing.T) {
	path := os.Getenv(crashEnv)
	if path == "" {
		t.Skip("runs only as the crash test's child process")
	}
	st, err := store.Open(path, &store.Options{Batch: crashBatch, Interval: 5 * time.Millisecond})
	if err != nil {
		fmt.Println("ERROR", err)
		os.Exit(1)
	}
	ln, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		fmt.Println("ERROR", err)
		os.Exit(1)
	}
	mux := http.NewServeMux()
	mux.Handle("POST /feedback", feedback.New(st, feedback.Options{}))
	mux.HandleFunc("POST /impress", func(w http.ResponseWriter, r *http.Request) {
		n, _ := strconv.Atoi(r.URL.Query().Get("n"))
		var ids []string
		for range n {
			im := impression(time.Now())
			if st.Record(im) {
				ids = append(ids, im.ID.String())
			}
		}
		_ = json.NewEncoder(w).Encode(ids)
	})
	fmt.Println("ADDR", ln.Addr())
	_ = http.Serve(ln, mux) // until SIGKILL
}

// impression is a 10-slot team-draft impression served at t.
func impression(t time.Time) *store.Impression {
	im := &store.Impression{ID: store.NewID(t), Time: t, Experiment: "spring-refresh", Policy: "team-draft"}
	im.Seed = im.ID.Seed()
	for i := range 10 {
		im.Slots = append(im.Slots, merge.Slot{Item: "pot-" + strconv.Itoa(i), Team: merge.Team(i % 2), RankA: int32(i/2 + 1), RankB: int32(i/2 + 1)})
	}
	return im
}

// acked is what the parent saw acknowledged by the child.
type acked struct {
	mu     sync.Mutex
	ims    map[string]bool   // impression ids Record accepted
	events map[string]string // idempotency key -> impression id, answered 202
	// loaded is closed once loadedAt events have been acknowledged: the
	// child is then under load with work behind it, and may be killed.
	loaded   chan struct{}
	loadedAt int
}

// count returns how many events have been acknowledged.
func (a *acked) count() int {
	a.mu.Lock()
	defer a.mu.Unlock()
	return len(a.events)
}

// crashLoad is how many acknowledged events the test waits for before the
// SIGKILL: 40 of the clients' batches, enough for several group commits.
const crashLoad = 400

// TestCrashKeepsAcknowledged runs the child under load from four clients,
// kills it with SIGKILL, and checks the file: consistent, every event that
// got a 202 present, and few impressions lost (only those still queued or
// in the commit under way).
func TestCrashKeepsAcknowledged(t *testing.T) {
	if testing.Short() {
		t.Skip("starts a child process")
	}
	path := filepath.Join(t.TempDir(), "crash.db")
	child := exec.Command(os.Args[0], "-test.run=^TestCrashChild$", "-test.timeout=60s")
	child.Env = append(os.Environ(), crashEnv+"="+path)
	out, err := child.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	child.Stderr = os.Stderr
	if err := child.Start(); err != nil {
		t.Fatal(err)
	}
	defer child.Process.Kill()
	line, err := bufio.NewReader(out).ReadString('\n')
	addr, ok := strings.CutPrefix(strings.TrimSpace(line), "ADDR ")
	if err != nil || !ok {
		t.Fatalf("child said %q, %v", line, err)
	}
	a := &acked{ims: map[string]bool{}, events: map[string]string{}, loaded: make(chan struct{}), loadedAt: crashLoad}
	stop := make(chan struct{})
	var wg sync.WaitGroup
	for w := range 4 {
		wg.Go(func() { drive(t, "http://"+addr, w, a, stop) })
	}
	// Kill once enough is acknowledged, while the clients keep sending;
	// the deadline only bounds a child that makes no progress.
	select {
	case <-a.loaded:
	case <-time.After(30 * time.Second):
		t.Fatalf("only %d events acknowledged within 30s, want %d before the kill", a.count(), crashLoad)
	}
	if err := child.Process.Kill(); err != nil { // SIGKILL on Unix
		t.Fatal(err)
	}
	close(stop)
	wg.Wait()
	_ = child.Wait()
	checkAfterCrash(t, path, a)
}

// drive loops: record 20 impressions, then send a click on each of the
// first 10 as one NDJSON batch, noting what was acknowledged.
func drive(t *testing.T, base string, w int, a *acked, stop <-chan struct{}) {
	c := &http.Client{Timeout: 2 * time.Second}
	for n := 0; ; n++ {
		select {
		case <-stop:
			return
		default:
		}
		resp, err := c.Post(base+"/impress?n=20", "", nil)
		if err != nil {
			return // the child is gone
		}
		var ids []string
		err = json.NewDecoder(resp.Body).Decode(&ids)
		resp.Body.Close()
		if err != nil {
			return
		}
		a.mu.Lock()
		for _, id := range ids {
			a.ims[id] = true
		}
		a.mu.Unlock()
		var body bytes.Buffer
		keys := map[int]string{}
		for i, id := range ids[:min(10, len(ids))] {
			keys[i+1] = fmt.Sprintf("w%d-%d-%d", w, n, i)
			fmt.Fprintf(&body, `{"impression":%q,"item":"pot-3","event":"click","key":%q}`+"\n", id, keys[i+1])
		}
		resp, err = c.Post(base+"/feedback", "application/x-ndjson", &body)
		if err != nil {
			return
		}
		var fr feedback.Response
		err = json.NewDecoder(resp.Body).Decode(&fr)
		resp.Body.Close()
		if err != nil || resp.StatusCode != http.StatusAccepted {
			return
		}
		if len(fr.Rejected) != 0 || fr.Accepted != len(keys) {
			t.Errorf("feedback answer %+v to %d events", fr, len(keys))
			return
		}
		a.mu.Lock()
		before := len(a.events)
		for i, k := range keys {
			a.events[k] = ids[i-1]
		}
		if before < a.loadedAt && len(a.events) >= a.loadedAt {
			close(a.loaded)
		}
		a.mu.Unlock()
	}
}

func checkAfterCrash(t *testing.T, path string, a *acked) {
	t.Helper()
	if err := store.Verify(path); err != nil {
		t.Fatalf("file after SIGKILL: %v", err)
	}
	st, err := store.Open(path, &store.Options{FinalizeEvery: -1})
	if err != nil {
		t.Fatalf("reopen after SIGKILL: %v", err)
	}
	defer st.Close()
	stored, keys := exported(t, st)
	for k, id := range a.events {
		if !keys[k] || !stored[id] {
			t.Errorf("acknowledged event %s on %s lost (impression stored %v)", k, id, stored[id])
		}
	}
	// A client retrying after the crash gets duplicates, not double counts.
	var replay []store.Event
	for k, id := range a.events {
		if len(replay) == 100 {
			break
		}
		pid, _ := store.ParseID(id)
		replay = append(replay, store.Event{Impression: pid, Item: "pot-3", Type: "click", Key: k})
	}
	for i, err := range st.AddEvents(t.Context(), replay) {
		if !errors.Is(err, store.ErrDuplicate) {
			t.Errorf("replayed acknowledged event %s after the crash: %v, want ErrDuplicate", replay[i].Key, err)
		}
	}
	lost := 0
	for id := range a.ims {
		if !stored[id] {
			lost++
		}
	}
	t.Logf("SIGKILL under load: %d impressions acknowledged, %d stored, %d lost (batch %d); %d events acknowledged, all kept",
		len(a.ims), len(stored), lost, crashBatch, len(a.events))
	if len(a.events) == 0 || len(a.ims) == 0 {
		t.Fatal("no traffic was acknowledged before the kill; the test proved nothing")
	}
	if lost > 2*crashBatch {
		t.Errorf("%d impressions lost, want at most about one batch (%d)", lost, crashBatch)
	}
}

// exported returns the impression ids and event keys in st's export.
func exported(t *testing.T, st *store.Store) (ids, keys map[string]bool) {
	t.Helper()
	var buf bytes.Buffer
	if err := st.Export(context.Background(), &buf, time.Time{}); err != nil {
		t.Fatal(err)
	}
	ids, keys = map[string]bool{}, map[string]bool{}
	dec := json.NewDecoder(&buf)
	for {
		var l struct {
			Impression string `json:"impression"`
			Events     []struct {
				Key string `json:"key"`
			} `json:"events"`
		}
		if err := dec.Decode(&l); errors.Is(err, io.EOF) {
			return ids, keys
		} else if err != nil {
			t.Fatal(err)
		}
		ids[l.Impression] = true
		for _, e := range l.Events {
			keys[e.Key] = true
		}
	}
}
