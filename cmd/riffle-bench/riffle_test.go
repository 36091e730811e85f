package main

import (
	"context"
	"errors"
	"net/http"
	"net/http/httptest"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"riffle/proxy/config"
)

// TestRiffleConfig parses the riffle.yaml the riffle mode writes with
// riffle's own strict loader, so a key the loader does not know, or a
// value it rejects, fails here rather than at bench time.
func TestRiffleConfig(t *testing.T) {
	b, err := riffleConfig("127.0.0.1:18080", "127.0.0.1:17464", "/tmp/bench/riffle.db",
		"http://127.0.0.1:17001", "http://127.0.0.1:17002", 150*time.Millisecond)
	if err != nil {
		t.Fatal(err)
	}
	c, err := config.Parse(b, "bench riffle.yaml")
	if err != nil {
		t.Fatalf("config.Parse: %v\n%s", err, b)
	}
	checks := []struct {
		what      string
		got, want any
	}{
		{"listen", c.Listen, "127.0.0.1:18080"},
		{"admin", c.Admin, "127.0.0.1:17464"},
		{"store", c.Store, "/tmp/bench/riffle.db"},
		{"incumbent.url", c.Incumbent.URL, "http://127.0.0.1:17001"},
		{"challenger.timeout", c.Challenger.Timeout, 150 * time.Millisecond},
		{"routes", len(c.Routes), 1},
		{"user.header", c.User.Header, shopperHeader},
		{"experiment.policy", c.Experiment.Policy, "team-draft"},
		{"experiment.ramp", *c.Experiment.Ramp, 1.0},
	}
	if len(c.Routes) == 1 {
		r := c.Routes[0]
		checks = append(checks, struct {
			what      string
			got, want any
		}{"routes[0]", [3]string{r.Path, r.List, r.ID}, [3]string{routePath, "/items", "/sku"}})
	}
	for _, ck := range checks {
		if ck.got != ck.want {
			t.Errorf("%s: got %v, want %v", ck.what, ck.got, ck.want)
		}
	}
}

func TestAwaitRoute(t *testing.T) {
	var calls atomic.Int32
	warming := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if calls.Add(1) < 3 {
			http.Error(w, "starting", http.StatusServiceUnavailable)
		}
	}))
	defer warming.Close()
	never := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		http.Error(w, "starting", http.StatusServiceUnavailable)
	}))
	defer never.Close()
	failed := make(chan error, 1)
	failed <- errors.New("sidecar: not assembled yet")
	tests := []struct {
		name       string
		url        string
		done       chan error
		wait       time.Duration
		wantExited bool
		wantErr    string // "" = ready
	}{
		{"ready after two 503s", warming.URL, make(chan error), 30 * time.Second, false, ""},
		{"Serve returned", never.URL, failed, 30 * time.Second, true, "sidecar.Serve: sidecar: not assembled yet"},
		{"never ready", never.URL, make(chan error), 200 * time.Millisecond, false, "not ready within 200ms"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			exited, err := awaitRoute(context.Background(), tt.url, tt.done, tt.wait)
			if exited != tt.wantExited || (tt.wantErr == "") != (err == nil) || (err != nil && !strings.Contains(err.Error(), tt.wantErr)) {
				t.Errorf("got %v, %v; want %v and an error containing %q", exited, err, tt.wantExited, tt.wantErr)
			}
		})
	}
}
