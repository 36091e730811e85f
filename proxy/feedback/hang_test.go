package feedback

import (
	"context"
	"log/slog"
	"net/http"
	"net/http/httptest"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"riffle/store"
)

// frozenStore is a real store behind a disk that freezes: while frozen,
// AddEvents waits (as a commit stuck in fsync does) until its context ends
// or 18 s pass, the freeze seen live.
type frozenStore struct {
	*store.Store
	frozen atomic.Bool
}

func (s *frozenStore) AddEvents(ctx context.Context, evs []store.Event) []error {
	if s.frozen.Load() {
		select {
		case <-ctx.Done():
			errs := make([]error, len(evs))
			for i := range errs {
				errs[i] = ctx.Err()
			}
			return errs
		case <-time.After(18 * time.Second):
		}
	}
	return s.Store.AddEvents(ctx, evs)
}

// TestHangingStoreIs503 freezes the store for a request: /feedback used to
// wait out the whole 18 s freeze; now it answers 503 with Retry-After once
// feedback.store_wait (here 300 ms) has passed, and the client's retry
// after the store recovers is recorded once.
func TestHangingStoreIs503(t *testing.T) {
	f := newFixture(t, Options{})
	fs := &frozenStore{Store: f.st}
	fs.frozen.Store(true)
	srv := httptest.NewServer(New(fs, Options{StoreWait: 300 * time.Millisecond, Logger: slog.New(slog.DiscardHandler),
		Now: func() time.Time { return t0.Add(time.Minute) }}))
	defer srv.Close()
	post := func() (*http.Response, time.Duration) {
		start := time.Now()
		resp, err := http.Post(srv.URL, "application/x-ndjson", strings.NewReader(f.ev("hoe", "click", "")))
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		return resp, time.Since(start)
	}
	resp, took := post()
	if resp.StatusCode != http.StatusServiceUnavailable || resp.Header.Get("Retry-After") == "" || took > 5*time.Second {
		t.Fatalf("frozen store: %d, Retry-After %q after %v; want 503 with Retry-After within the 300ms wait (bound 5s)",
			resp.StatusCode, resp.Header.Get("Retry-After"), took)
	}
	t.Logf("frozen store answered %d after %v", resp.StatusCode, took)
	fs.frozen.Store(false)
	if resp, _ := post(); resp.StatusCode != http.StatusAccepted {
		t.Fatalf("retry after recovery: %d, want 202", resp.StatusCode)
	}
	var b strings.Builder
	if err := f.st.Export(t.Context(), &b, time.Time{}); err != nil {
		t.Fatal(err)
	}
	if n := strings.Count(b.String(), `"event":"click"`); n != 1 {
		t.Errorf("store holds %d clicks after the 503 and the retry, want 1", n)
	}
}

// TestClientGoneIsNotAStoreFailure: a client that hangs up while its
// events wait for the store got no answer and will retry. It used to be
// counted as a store rejection, which the demo's summary (counting
// answers) never showed: "rejected 0" beside a store rejection in
// /metrics. It is counted as client-gone now.
func TestClientGoneIsNotAStoreFailure(t *testing.T) {
	f := newFixture(t, Options{})
	fs := &frozenStore{Store: f.st}
	fs.frozen.Store(true)
	h := New(fs, Options{Registerer: f.reg, Logger: slog.New(slog.DiscardHandler)})
	ctx, cancel := context.WithTimeout(t.Context(), 100*time.Millisecond)
	defer cancel()
	req := httptest.NewRequestWithContext(ctx, http.MethodPost, "/feedback", strings.NewReader(f.ev("hoe", "click", "")))
	h.ServeHTTP(httptest.NewRecorder(), req)
	if gone, st := f.rejected(reasonClientGone), f.rejected(reasonStore); gone != 1 || st != 0 {
		t.Errorf("rejected{client-gone} = %v, {store} = %v; want 1 and 0", gone, st)
	}
}
