package proxy

import (
	"encoding/json"
	"io"
	"net/http"
	"sync"
	"testing"

	"riffle/merge"
)

func TestFeedbackMounted(t *testing.T) {
	var got string
	fb := http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		b, _ := io.ReadAll(r.Body)
		got = string(b)
		w.WriteHeader(http.StatusAccepted)
	})
	var incPaths []string
	var mu sync.Mutex
	inc := backendFunc(t, func(w http.ResponseWriter, r *http.Request) {
		mu.Lock()
		incPaths = append(incPaths, r.Method+" "+r.URL.Path)
		mu.Unlock()
		w.Write([]byte(listBody("i", "a")))
	})
	h := newHarness(t, testConfig(inc.URL, jsonBackend(t, listBody("c", "b")).URL), Options{Feedback: fb})
	event := `{"impression":"x","item":"a","event":"click"}`
	if rep := h.do(t, "POST", "/feedback", event, nil); rep.status != http.StatusAccepted || got != event {
		t.Errorf("POST /feedback: status %d, handler got %q; want 202 and the event", rep.status, got)
	}
	h.do(t, "GET", "/feedback", "", nil)
	mu.Lock()
	defer mu.Unlock()
	if len(incPaths) != 1 || incPaths[0] != "GET /feedback" {
		t.Errorf("incumbent saw %v, want only the GET /feedback passed through", incPaths)
	}
}

func TestPassThroughIncumbentDown(t *testing.T) {
	h := newHarness(t, testConfig(closedURL(t), closedURL(t)), Options{})
	rep := h.do(t, "GET", "/v1/other", "", nil)
	var e errorBody
	if rep.status != http.StatusBadGateway || json.Unmarshal(rep.body, &e) != nil || e.Backend != "incumbent" {
		t.Errorf("got %d %s, want 502 with a JSON body naming the incumbent", rep.status, rep.body)
	}
}

// TestInFlightKeepsItsRuntime: a request that started before Apply ends
// on the configuration it started with.
func TestInFlightKeepsItsRuntime(t *testing.T) {
	arrived, release := make(chan struct{}, 1), make(chan struct{})
	inc := backendFunc(t, func(w http.ResponseWriter, r *http.Request) {
		if r.URL.Query().Get("slow") != "" {
			arrived <- struct{}{}
			<-release
		}
		w.Write([]byte(listBody("i", "a", "b")))
	})
	chal := jsonBackend(t, listBody("c", "c")).URL
	h := newHarness(t, testConfig(inc.URL, chal), Options{})
	done := make(chan reply)
	go func() { done <- h.do(t, "GET", "/v1/recommend?slow=1", "", nil) }()
	<-arrived // the request is at the incumbent, so it has its runtime
	next := testConfig(inc.URL, chal)
	next.Experiment.Name = "summer-refresh"
	next.Experiment.Policy = "balanced"
	if err := h.srv.Apply(next); err != nil {
		t.Fatal(err)
	}
	close(release)
	<-done
	if im := h.sink.last(t); im.Experiment != "spring-refresh" || im.Policy != "team-draft" {
		t.Errorf("in-flight request recorded %q/%q, want the old spring-refresh/team-draft", im.Experiment, im.Policy)
	}
	h.do(t, "GET", "/v1/recommend", "", nil)
	if im := h.sink.last(t); im.Experiment != "summer-refresh" || im.Policy != "balanced" {
		t.Errorf("new request recorded %q/%q, want summer-refresh/balanced", im.Experiment, im.Policy)
	}
}

func TestHedgesApplied(t *testing.T) {
	a, b := skus("rake", 6), skus("hose", 6)
	cfg := testConfig(jsonBackend(t, listBody("incumbent", a...)).URL, jsonBackend(t, listBody("challenger", b...)).URL)
	cfg.Experiment.ChallengerFromSlot = 3
	cfg.Experiment.MaxChallengerSlots = 1
	h := newHarness(t, cfg, Options{})
	rep := h.do(t, "GET", "/v1/recommend", "", nil)
	got := servedItems(t, rep.body)
	if len(got) != 6 || got[0] != a[0] || got[1] != a[1] {
		t.Fatalf("served %v, want 6 items starting with the incumbent's top two", got)
	}
	im := h.sink.last(t)
	if n := len(teamItems(im.Slots, merge.Challenger)); n != 1 {
		t.Errorf("%d challenger slots, want the cap of 1", n)
	}
	if im.Slots[0].Team != merge.Fixed || im.Slots[1].Team != merge.Fixed {
		t.Errorf("slots before challenger_from_slot have teams %v %v, want fixed", im.Slots[0].Team, im.Slots[1].Team)
	}
	checkSlotsMatch(t, im.Slots, got)
}

func TestRoutePathAndQueryJoined(t *testing.T) {
	var mu sync.Mutex
	var got []string
	mk := func(body string) string {
		return backendFunc(t, func(w http.ResponseWriter, r *http.Request) {
			mu.Lock()
			got = append(got, r.URL.EscapedPath()+"?"+r.URL.RawQuery)
			mu.Unlock()
			w.Write([]byte(body))
		}).URL
	}
	cfg := testConfig(mk(listBody("i", "a"))+"/models/pop?v=3", mk(listBody("c", "b"))+"/models/aff/")
	cfg.Routes[0].Path = "/v1/recommend/{shelf}"
	h := newHarness(t, cfg, Options{})
	if rep := h.do(t, "GET", "/v1/recommend/seed%2Ftrays?n=10&user=g", "", nil); rep.status != 200 {
		t.Fatalf("status %d", rep.status)
	}
	mu.Lock()
	defer mu.Unlock()
	want := map[string]bool{
		"/models/pop/v1/recommend/seed%2Ftrays?v=3&n=10&user=g": true,
		"/models/aff/v1/recommend/seed%2Ftrays?n=10&user=g":     true,
	}
	if len(got) != 2 || !want[got[0]] || !want[got[1]] || got[0] == got[1] {
		t.Errorf("backends saw %q, want %v", got, want)
	}
}
