// Package admin serves riffle's admin listener: Prometheus metrics, health
// and readiness, the experiment status and config APIs, reload, guardrail
// reset, store snapshots and, when asked, profiling.
//
// The listener is for operators and the scraper, not for the public: the
// mutating and data-exposing endpoints take a bearer token, but nothing here
// is hardened for untrusted networks. The handler returned by New is safe for
// concurrent use; so must be the functions and interfaces in Options.
package admin

import (
	"context"
	"io"
	"log/slog"
	"net/http"
	"time"

	"github.com/go-chi/chi/v5"
	"github.com/go-chi/chi/v5/middleware"
	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/promhttp"

	"riffle/proxy/guard"
)

// Reloader reloads the configuration from its source.
type Reloader interface {
	// Reload loads, validates and swaps in the config; on error the old
	// config stays in force.
	Reload() error
}

// Guardrails is the guardrail state that the API reports and resets.
type Guardrails interface {
	Tripped() (bool, guard.Trip)
	Reset()
}

// Snapshotter writes a consistent copy of the live store.
type Snapshotter interface {
	Snapshot(w io.Writer) (int64, error)
}

var _ Guardrails = (*guard.Guard)(nil)

// ConfigStatus is the config in force and the state of reloading it, as
// GET /api/v1/config reports it.
type ConfigStatus struct {
	// Hash identifies the config in force.
	Hash string
	// LoadedAt is when the config in force was loaded.
	LoadedAt time.Time
	// LastError is the last reload's error; empty when it succeeded.
	LastError string
	// LastAttempt is when a reload was last tried; zero when never.
	LastAttempt time.Time
	// Problems, when non-nil, lists the last failed reload's problems (for
	// example a []config.Problem, each with its key path); it is shown as
	// it marshals to JSON.
	Problems any
	// Config is the config in force. It is shown under its YAML keys with
	// secrets redacted (see Redact).
	Config any
}

// Options configures the admin handler. A nil dependency makes its endpoint
// answer 501 with a JSON error saying it is not configured.
type Options struct {
	// Metrics is served by GET /metrics in the Prometheus text format.
	Metrics prometheus.Gatherer
	// Token, when non-empty, is the bearer token (RFC 6750) that
	// POST /api/v1/reload, POST /api/v1/guardrails/reset,
	// GET /api/v1/snapshot and /debug/pprof/ require. Empty means no token.
	Token string
	// TokenSource, when non-nil, replaces Token: it is called on every
	// protected request, so a rotated token file takes effect at once (for
	// example (*config.Config).AdminToken). An empty token means none is
	// required; an error refuses the request with 503.
	TokenSource func() (string, error)
	// Pprof mounts net/http/pprof under /debug/pprof/.
	Pprof bool
	// Ready says why the process is not ready for traffic, nil when it is;
	// GET /readyz reports it, passing the request's context. If nil, the
	// process is always ready. See AllReady and BackendReady.
	Ready func(ctx context.Context) error
	// Experiment returns the experiment status that GET /api/v1/experiment
	// marshals as JSON.
	Experiment func(ctx context.Context) (any, error)
	// Config returns what GET /api/v1/config reports.
	Config func() ConfigStatus
	// Reloader serves POST /api/v1/reload.
	Reloader Reloader
	// Guardrails serves GET /api/v1/guardrails and
	// POST /api/v1/guardrails/reset.
	Guardrails Guardrails
	// Snapshot serves GET /api/v1/snapshot.
	Snapshot Snapshotter
	// Status, when non-nil, is mounted at /status and below it.
	Status http.Handler
	// Logger receives the admin actions and failures. If nil, nothing is
	// logged.
	Logger *slog.Logger
	// Now reads the clock (snapshot file names). If nil, time.Now.
	Now func() time.Time
}

// api holds what the handlers need.
type api struct {
	o   Options
	log *slog.Logger
	now func() time.Time
}

// New returns the admin listener's handler.
func New(o Options) http.Handler {
	a := &api{o: o, log: o.Logger, now: o.Now}
	if a.log == nil {
		a.log = slog.New(slog.DiscardHandler)
	}
	if a.now == nil {
		a.now = time.Now
	}
	auth := requireToken(o.Token, o.TokenSource, a.log)

	r := chi.NewRouter()
	r.NotFound(func(w http.ResponseWriter, r *http.Request) {
		writeError(w, http.StatusNotFound, "no admin endpoint "+r.URL.Path)
	})
	r.MethodNotAllowed(func(w http.ResponseWriter, r *http.Request) {
		writeError(w, http.StatusMethodNotAllowed, r.Method+" is not allowed on "+r.URL.Path)
	})
	r.Get("/healthz", healthz)
	r.Get("/readyz", a.readyz)
	r.Get("/metrics", a.metrics())
	r.Route("/api/v1", func(r chi.Router) {
		r.Get("/experiment", a.experiment)
		r.Get("/config", a.config)
		r.Get("/guardrails", a.guardrails)
		r.Group(func(r chi.Router) {
			r.Use(auth)
			r.Post("/reload", a.reload)
			r.Post("/guardrails/reset", a.resetGuardrails)
			r.Get("/snapshot", a.snapshot)
		})
	})
	if o.Pprof {
		r.With(auth).Mount("/debug", middleware.Profiler())
	}
	if o.Status != nil {
		// The page lives at /status/; without the slash, a handler under
		// StripPrefix sees an empty path and sends the browser to /, a 404.
		r.Get("/status", func(w http.ResponseWriter, r *http.Request) {
			u := *r.URL
			u.Path += "/"
			http.Redirect(w, r, u.RequestURI(), http.StatusMovedPermanently)
		})
		r.Handle("/status/*", o.Status)
	}
	return r
}

func (a *api) metrics() http.HandlerFunc {
	if a.o.Metrics == nil {
		return notConfigured("metrics")
	}
	h := promhttp.HandlerFor(a.o.Metrics, promhttp.HandlerOpts{ErrorHandling: promhttp.ContinueOnError})
	return h.ServeHTTP
}

// notConfigured answers 501 for an endpoint whose dependency is missing.
func notConfigured(what string) http.HandlerFunc {
	return func(w http.ResponseWriter, r *http.Request) {
		writeError(w, http.StatusNotImplemented, what+" is not configured on this admin listener")
	}
}
