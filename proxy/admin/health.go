package admin

import (
	"context"
	"fmt"
	"io"
	"net/http"
	"strings"
	"time"
)

// healthz says the process is alive and serving; nothing else.
func healthz(w http.ResponseWriter, r *http.Request) {
	w.Header().Set("Content-Type", "text/plain; charset=utf-8")
	w.Header().Set("Cache-Control", "no-store")
	_, _ = w.Write([]byte("ok\n"))
}

// readiness is the body of GET /readyz.
type readiness struct {
	Ready  bool   `json:"ready"`
	Reason string `json:"reason,omitempty"`
}

func (a *api) readyz(w http.ResponseWriter, r *http.Request) {
	if a.o.Ready != nil {
		if err := a.o.Ready(r.Context()); err != nil {
			writeJSON(w, http.StatusServiceUnavailable, readiness{Reason: err.Error()})
			return
		}
	}
	writeJSON(w, http.StatusOK, readiness{Ready: true})
}

// BackendReady is a readiness check on one backend: it passes when the
// backend answered a proxied request recently, or else answers a probe.
type BackendReady struct {
	// Name names the backend in messages, e.g. "incumbent".
	Name string
	// Last returns when the backend last sent an HTTP response on a
	// proxied request; zero when never (see proxy.Server.LastReached).
	Last func() time.Time
	// Within is how recent that answer must be. If zero, 30 seconds.
	Within time.Duration
	// URL, when non-empty, is sent a GET when the last answer is older
	// than Within, and any HTTP response, whatever its status, counts as
	// reached; so a sidecar that has had no traffic yet, as before it is
	// first ready, can become ready. Empty means no probe.
	URL string
	// Client sends the probe. If nil, http.DefaultClient.
	Client *http.Client
	// Timeout bounds the probe. If zero, one second.
	Timeout time.Duration
	// Now reads the clock. If nil, time.Now.
	Now func() time.Time
}

// Check returns nil when the backend was reached recently or answers the
// probe, and otherwise an error wrapping ErrNotReached that says why.
func (b BackendReady) Check(ctx context.Context) error {
	now, within := b.Now, b.Within
	if now == nil {
		now = time.Now
	}
	if within <= 0 {
		within = 30 * time.Second
	}
	var why string
	if t := b.Last(); t.IsZero() {
		why = "never reached"
	} else if ago := now().Sub(t); ago > within {
		why = fmt.Sprintf("last reached %s ago, more than %s", ago.Round(time.Millisecond), within)
	} else {
		return nil
	}
	if b.URL == "" {
		return fmt.Errorf("%s %s: %w", b.Name, why, ErrNotReached)
	}
	if err := b.probe(ctx); err != nil {
		return fmt.Errorf("%s %s, and a probe of %s failed: %v: %w", b.Name, why, b.URL, err, ErrNotReached)
	}
	return nil
}

// probe sends one GET to b.URL and discards the answer.
func (b BackendReady) probe(ctx context.Context) error {
	timeout, client := b.Timeout, b.Client
	if timeout <= 0 {
		timeout = time.Second
	}
	if client == nil {
		client = http.DefaultClient
	}
	ctx, cancel := context.WithTimeout(ctx, timeout)
	defer cancel()
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, b.URL, nil)
	if err != nil {
		return err
	}
	resp, err := client.Do(req)
	if err != nil {
		return err
	}
	_, _ = io.Copy(io.Discard, io.LimitReader(resp.Body, 4096))
	return resp.Body.Close()
}

// AllReady returns a readiness check that runs every check and fails when
// any does, with every failure in its message, separated by "; ". The error
// unwraps to each failure, for errors.Is.
func AllReady(checks ...func(context.Context) error) func(context.Context) error {
	return func(ctx context.Context) error {
		var errs []error
		for _, c := range checks {
			if err := c(ctx); err != nil {
				errs = append(errs, err)
			}
		}
		if len(errs) == 0 {
			return nil
		}
		return notReady(errs)
	}
}

// notReady joins readiness failures on one line.
type notReady []error

func (e notReady) Error() string {
	msgs := make([]string, len(e))
	for i, err := range e {
		msgs[i] = err.Error()
	}
	return strings.Join(msgs, "; ")
}

func (e notReady) Unwrap() []error { return e }
