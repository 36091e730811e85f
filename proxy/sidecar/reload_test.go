package sidecar_test

import (
	"context"
	"encoding/json"
	"fmt"
	"net/http"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"
)

// served is one request of the reload test's traffic.
type served struct {
	phase int32 // the test's phase when the request was sent
	user  string
	a     answer
}

// traffic sends requests from a few goroutines, cycling through users,
// until stop is called; each request is tagged with the phase in force
// when it was sent.
type traffic struct {
	phase  atomic.Int32
	cancel context.CancelFunc
	wg     sync.WaitGroup
	mu     sync.Mutex
	log    []served
}

// startTraffic starts workers goroutines cycling through users users.
func startTraffic(data string, workers, users int) *traffic {
	ctx, cancel := context.WithCancel(context.Background())
	tr := &traffic{cancel: cancel}
	var next atomic.Int64
	for range workers {
		tr.wg.Add(1)
		go func() {
			defer tr.wg.Done()
			for ctx.Err() == nil {
				user := fmt.Sprintf("shopper-%03d", next.Add(1)%int64(users))
				phase := tr.phase.Load()
				a := recommend(context.Background(), data, user, "", nil)
				tr.mu.Lock()
				tr.log = append(tr.log, served{phase: phase, user: user, a: a})
				tr.mu.Unlock()
			}
		}()
	}
	return tr
}

// count returns how many requests were sent in phase so far.
func (tr *traffic) count(phase int32) int {
	tr.mu.Lock()
	defer tr.mu.Unlock()
	n := 0
	for _, s := range tr.log {
		if s.phase == phase {
			n++
		}
	}
	return n
}

// stop ends the traffic, waits for the requests in flight and returns
// them all.
func (tr *traffic) stop() []served {
	tr.cancel()
	tr.wg.Wait()
	return tr.log
}

// TestReloadRampUnderTraffic rewrites the config with a higher ramp while
// four goroutines send requests, and checks that the file watch picks the
// change up, that the ramp in force moves in the status JSON, the metrics
// and the share of interleaved answers, that users stay in the ramp they
// were in (a rising ramp only adds users), and that no request fails.
func TestReloadRampUnderTraffic(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	inc := newBackend(t, "incumbent", incumbentShelf, 0)
	chal := newBackend(t, "challenger", challengerShelf, 0)
	c := newConf(dir, inc.URL, chal.URL)
	c.Ramp = 0.25
	r := start(t, dir, c)
	before := r.configView(t).Hash

	tr := startTraffic(r.data, 4, 300)
	defer tr.stop()
	eventually(t, 10*time.Second, func() (bool, string) {
		n := tr.count(0)
		return n >= 400, fmt.Sprintf("%d requests before the reload, want 400", n)
	})
	tr.phase.Store(1) // the file is being replaced: either config may serve
	c.Ramp = 0.75
	writeFile(t, r.path, c.yaml())
	eventually(t, 5*time.Second, func() (bool, string) {
		h := r.configView(t).Hash
		return h != before, fmt.Sprintf("config hash still %s after the file was replaced", h)
	})
	tr.phase.Store(2) // the new config is in force for every request sent from now
	eventually(t, 5*time.Second, func() (bool, string) {
		st := r.experiment(t)
		return st.Ramp != nil && *st.Ramp == 0.75, fmt.Sprintf("/api/v1/experiment ramp %v, want 0.75", deref(st.Ramp))
	})
	eventually(t, 10*time.Second, func() (bool, string) {
		n := tr.count(2)
		return n >= 400, fmt.Sprintf("%d requests after the reload, want 400", n)
	})
	log := tr.stop()

	checkRampShares(t, log)
	sc := r.scrape(t)
	if got := sc.value("riffle_experiment_ramp_ratio", labels{"experiment": "spring-refresh"}); got != 0.75 {
		t.Errorf("riffle_experiment_ramp_ratio = %v after the reload, want 0.75", got)
	}
	if got := sc.value("riffle_config_reloads_total", labels{"result": "success"}); got != 1 {
		t.Errorf("riffle_config_reloads_total{result=success} = %v, want 1", got)
	}
	if got := sc.value("riffle_config_reloads_total", labels{"result": "failure"}); got != 0 {
		t.Errorf("riffle_config_reloads_total{result=failure} = %v, want 0", got)
	}
}

// deref shows a pointer's value, or nil.
func deref(p *float64) any {
	if p == nil {
		return nil
	}
	return *p
}

// checkRampShares checks the reload test's answers: none failed, each
// phase's interleaved share is near its ramp, and every user's treatment
// is sticky within a phase and only ever moves into the ramp.
func checkRampShares(t *testing.T, log []served) {
	t.Helper()
	in := [3]map[string]bool{{}, {}, {}} // phase -> user -> interleaved
	var n, mixed [3]int
	for _, s := range log {
		if s.a.err != nil || s.a.status != http.StatusOK || s.a.impression == "" || len(s.a.skus) != 10 {
			t.Fatalf("request as %s in phase %d: status %d, impression %q, %d items, err %v; want 200 with 10 items",
				s.user, s.phase, s.a.status, s.a.impression, len(s.a.skus), s.a.err)
		}
		n[s.phase]++
		if s.a.interleaved() {
			mixed[s.phase]++
		}
		if prev, seen := in[s.phase][s.user]; seen && prev != s.a.interleaved() && s.phase != 1 {
			t.Errorf("user %s was interleaved on one request and not on another in phase %d", s.user, s.phase)
		}
		in[s.phase][s.user] = s.a.interleaved()
	}
	// The users form a fixed sample of 300 whose hashed buckets are spread
	// evenly over [0,1), so the interleaved share is the ramp give or take
	// a binomial standard deviation of about 0.025; 0.1 is four of them
	// (common practice for a bound that must not flake).
	for _, ph := range []struct {
		phase int
		ramp  float64
	}{{0, 0.25}, {2, 0.75}} {
		share := float64(mixed[ph.phase]) / float64(n[ph.phase])
		if share < ph.ramp-0.1 || share > ph.ramp+0.1 {
			t.Errorf("phase %d: %d of %d answers interleaved (%.3f), want the ramp %v within 0.1",
				ph.phase, mixed[ph.phase], n[ph.phase], share, ph.ramp)
		}
	}
	for user, was := range in[0] {
		if now, seen := in[2][user]; seen && was && !now {
			t.Errorf("user %s was in the ramp at 0.25 and left it at 0.75; a rising ramp must only add users", user)
		}
	}
}

// TestReloadRejectsInvalid replaces the config, through the file watch and
// then POST /api/v1/reload, with files that must be refused one at a time,
// and checks that the old config keeps serving, that GET /api/v1/config
// shows the error with its key path, and that every refusal is counted.
func TestReloadRejectsInvalid(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	inc := newBackend(t, "incumbent", incumbentShelf, 0)
	chal := newBackend(t, "challenger", challengerShelf, 0)
	c := newConf(dir, inc.URL, chal.URL)
	r := start(t, dir, c)
	hash := r.configView(t).Hash

	failures := 0.0
	for _, tc := range refusedFiles(c) {
		t.Run(tc.name, func(t *testing.T) {
			writeFile(t, r.path, tc.text)
			failures++
			waitFailures(t, r, failures) // the file watch tried it and refused it
			checkRefused(t, r, hash, tc.wantPath, tc.wantMsg)

			status, body := do(t, http.MethodPost, r.adm+"/api/v1/reload")
			var resp struct{ Error string }
			_ = json.Unmarshal(body, &resp)
			if status != http.StatusUnprocessableEntity || !strings.Contains(resp.Error, tc.wantPath) ||
				!strings.Contains(resp.Error, tc.wantMsg) {
				t.Errorf("POST /api/v1/reload: status %d, body %s; want 422 naming %q and %q", status, body, tc.wantPath, tc.wantMsg)
			}
			failures++
			waitFailures(t, r, failures)
			checkRefused(t, r, hash, tc.wantPath, tc.wantMsg)
		})
	}

	// A valid file again: the error clears and its ramp of 0 serves.
	good := c
	good.Ramp = 0
	writeFile(t, r.path, good.yaml())
	status, body := do(t, http.MethodPost, r.adm+"/api/v1/reload")
	var ok struct{ Reloaded bool }
	if err := json.Unmarshal(body, &ok); err != nil || status != http.StatusOK || !ok.Reloaded {
		t.Fatalf("POST /api/v1/reload of a valid file: status %d, body %s; want 200 reloaded", status, body)
	}
	if cv := r.configView(t); cv.LastError != "" || cv.Hash == hash {
		t.Errorf("after a good reload: hash %s (old %s), last_error %q; want a new hash and no error", cv.Hash, hash, cv.LastError)
	}
	if a := mustRecommend(t, r.data, "shopper-1", ""); a.interleaved() {
		t.Errorf("after reloading ramp 0: items %v, want the incumbent's list alone", a.skus)
	}
}

// refusedFile is a config file a reload must refuse.
type refusedFile struct {
	name     string
	text     string
	wantPath string // the problem's key path; "" for the whole file
	wantMsg  string // in the problem's message and the reload's answer
}

// refusedFiles are c made invalid in one way each, or changed in a key
// that needs a restart.
func refusedFiles(c conf) []refusedFile {
	// Each bad file also sets the ramp to 0, so that a file taken into use
	// by mistake would show in the answers.
	bad := c
	bad.Ramp = 0
	badPointer, negTimeout, restart := bad, bad, bad
	badPointer.List = "items"
	negTimeout.Timeout = -5 * time.Millisecond
	restart.Listen = "127.0.0.1:1"
	return []refusedFile{
		{"bad YAML", strings.Replace(bad.yaml(), "{header: Shopper-Id}", "{header: Shopper-Id", 1), "", "invalid YAML"},
		{"bad pointer", badPointer.yaml(), "routes[0].list", `"items" is not a JSON pointer`},
		{"negative timeout", negTimeout.yaml(), "incumbent.timeout", "must be positive"},
		{"restart-only change", restart.yaml(), "listen", "needs a restart"},
	}
}

// waitFailures waits until riffle_config_reloads_total{result="failure"}
// reaches want.
func waitFailures(t *testing.T, r *running, want float64) {
	t.Helper()
	eventually(t, 5*time.Second, func() (bool, string) {
		got := r.scrape(t).value("riffle_config_reloads_total", labels{"result": "failure"})
		return got == want, fmt.Sprintf("riffle_config_reloads_total{result=failure} = %v, want %v", got, want)
	})
}

// checkRefused checks that the config with hash is still in force and
// serving, and that GET /api/v1/config reports the refusal.
func checkRefused(t *testing.T, r *running, hash, wantPath, wantMsg string) {
	t.Helper()
	cv := r.configView(t)
	if cv.Hash != hash {
		t.Errorf("config hash %s after a refused reload, want the old %s", cv.Hash, hash)
	}
	if !strings.Contains(cv.LastError, wantMsg) || !strings.Contains(cv.LastError, wantPath) {
		t.Errorf("/api/v1/config last_error %q, want it to name %q and %q", cv.LastError, wantPath, wantMsg)
	}
	found := false
	for _, p := range cv.Problems {
		if p.Path == wantPath && strings.Contains(p.Message, wantMsg) && (wantPath != "" || p.Line > 0) {
			found = true
		}
	}
	if !found {
		t.Errorf("/api/v1/config problems %+v, want one at key path %q saying %q (with its line when it has no path)",
			cv.Problems, wantPath, wantMsg)
	}
	if a := mustRecommend(t, r.data, "shopper-1", ""); !a.interleaved() {
		t.Errorf("after a refused reload: items %v, want the old config's interleaved list", a.skus)
	}
}
