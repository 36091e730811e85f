package admin

import (
	"context"
	"encoding/json"
	"errors"
	"net/http"
	"net/http/httptest"
	"strings"
	"sync"
	"testing"
	"time"
)

func TestReadyz(t *testing.T) {
	now := func() time.Time { return t0 }
	at := func(t time.Time) func() time.Time { return func() time.Time { return t } }
	backend := func(name string, last time.Time) func(context.Context) error {
		return BackendReady{Name: name, Last: at(last), Within: 30 * time.Second, Now: now}.Check
	}
	tests := []struct {
		name       string
		ready      func(context.Context) error
		wantStatus int
		wantReason string
	}{
		{name: "no check", ready: nil, wantStatus: 200},
		{name: "both reached", ready: AllReady(
			backend("incumbent", t0.Add(-time.Second)), backend("challenger", t0)), wantStatus: 200},
		{name: "one stale, one never", ready: AllReady(
			backend("incumbent", t0.Add(-time.Minute)), backend("challenger", time.Time{})),
			wantStatus: 503,
			wantReason: "incumbent last reached 1m0s ago, more than 30s: admin: backend not reached recently; " +
				"challenger never reached: admin: backend not reached recently"},
		{name: "store closed", ready: func(context.Context) error { return errors.New("store: closed") },
			wantStatus: 503, wantReason: "store: closed"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			f := newFixture(t, func(o *Options) { o.Ready = tt.ready })
			resp, body := f.do(t, http.MethodGet, "/readyz", "")
			if resp.StatusCode != tt.wantStatus {
				t.Fatalf("status %d, want %d; body %s", resp.StatusCode, tt.wantStatus, body)
			}
			var got readiness
			if err := json.Unmarshal(body, &got); err != nil {
				t.Fatalf("body %s: %v", body, err)
			}
			want := readiness{Ready: tt.wantStatus == 200, Reason: tt.wantReason}
			if got != want {
				t.Errorf("got %+v, want %+v", got, want)
			}
		})
	}
}

func TestBackendReadyProbes(t *testing.T) {
	// Any HTTP answer counts as reached, even a 404 from a model server
	// that has no handler at its root.
	var probes int
	var mu sync.Mutex
	up := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		mu.Lock()
		probes++
		mu.Unlock()
		http.NotFound(w, r)
	}))
	defer up.Close()
	down := httptest.NewServer(http.NotFoundHandler())
	downURL := down.URL
	down.Close() // nothing listens there now
	never := func() time.Time { return time.Time{} }

	tests := []struct {
		name       string
		b          BackendReady
		wantErr    bool
		wantProbes int
	}{
		{name: "recent: no probe", b: BackendReady{Name: "incumbent", Last: time.Now, URL: up.URL}, wantProbes: 0},
		{name: "never reached, probe answers", b: BackendReady{Name: "incumbent", Last: never, URL: up.URL}, wantProbes: 1},
		{name: "never reached, nothing listens", b: BackendReady{Name: "challenger", Last: never, URL: downURL, Timeout: 2 * time.Second}, wantErr: true},
		{name: "never reached, no probe URL", b: BackendReady{Name: "challenger", Last: never}, wantErr: true},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			mu.Lock()
			probes = 0
			mu.Unlock()
			err := tt.b.Check(t.Context())
			if (err != nil) != tt.wantErr {
				t.Fatalf("Check = %v, want error %v", err, tt.wantErr)
			}
			if err != nil && (!errors.Is(err, ErrNotReached) || !strings.Contains(err.Error(), tt.b.Name)) {
				t.Errorf("error %v: want ErrNotReached naming %s", err, tt.b.Name)
			}
			mu.Lock()
			defer mu.Unlock()
			if probes != tt.wantProbes {
				t.Errorf("%d probes, want %d", probes, tt.wantProbes)
			}
		})
	}
}

func TestAllReadyErrorsMatchSentinel(t *testing.T) {
	check := AllReady(BackendReady{Name: "challenger", Last: func() time.Time { return time.Time{} }}.Check)
	if err := check(t.Context()); !errors.Is(err, ErrNotReached) {
		t.Errorf("error %v does not match ErrNotReached", err)
	}
	if err := AllReady()(t.Context()); err != nil {
		t.Errorf("no checks: %v, want nil", err)
	}
}
