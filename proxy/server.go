package proxy

import (
	"errors"
	"fmt"
	"log/slog"
	"net/http"
	"sync"
	"sync/atomic"
	"time"

	"riffle/proxy/config"
)

// Server is the data plane. Create it with New; serve Handler on the
// listen address; call Apply to switch to a new configuration.
//
// On a configured route every response carries ImpressionHeader. A user
// outside the ramp gets the incumbent's answer as it came; inside it, both
// backends are called and the merged list is served, unless the challenger
// fails (no answer within its deadline, unreachable, not 2xx, not JSON, no
// list at the pointer, no element with an identity), in which case the
// incumbent's answer is served as it came and the impression says why. An
// incumbent 4xx is the client's to see and is passed on as it came. An
// incumbent that fails (no answer, unreachable, 5xx, unreadable body) gets
// a 502 with a JSON body {"error", "backend", "reason"}, or, under
// on_incumbent_failure: serve-challenger, the challenger's answer alone.
type Server struct {
	sink        Sink
	gate        Gate
	observer    Observer
	feedback    http.Handler
	log         *slog.Logger
	now         func() time.Time
	transport   http.RoundTripper
	maxResponse int64
	m           *metrics
	incM, chalM backendMetrics

	mu sync.Mutex // serialises Apply
	rt atomic.Pointer[runtime]

	lastIncumbent, lastChallenger atomic.Int64 // Unix nanoseconds; 0 = never

	exchanges sync.Pool // *exchange
	gzip      sync.Pool // *gzip.Reader
	bodies    budget    // bytes held by backend answer bodies in flight
	pseudonym string    // this server's name in Via fields
	copyBufs  bufferPool
}

// New returns a Server running o.Config. It fails, wrapping ErrConfig,
// when the config cannot be run, and when the metrics cannot be
// registered on o.Registerer.
func New(o Options) (*Server, error) {
	if o.Config == nil {
		return nil, fmt.Errorf("proxy: %w: Options.Config is nil", ErrConfig)
	}
	s := &Server{
		sink: o.Sink, gate: o.Gate, observer: o.Observer, feedback: o.Feedback,
		log: o.Logger, now: o.Now, transport: o.Transport, maxResponse: o.MaxResponseBytes,
	}
	if s.log == nil {
		s.log = slog.New(slog.DiscardHandler)
	}
	if s.now == nil {
		s.now = time.Now
	}
	if s.transport == nil {
		s.transport = NewTransport()
	}
	if s.maxResponse <= 0 {
		s.maxResponse = defaultMaxResponseBytes
	}
	s.pseudonym = newPseudonym()
	s.exchanges.New = func() any { return &exchange{done: make(chan struct{}, 1)} }
	s.m = newMetrics(s)
	s.incM, s.chalM = s.m.backend("incumbent"), s.m.backend("challenger")
	if err := s.Apply(o.Config); err != nil {
		return nil, err
	}
	// Registered last, so that a config New refuses leaves no trace.
	if err := s.m.register(o.Registerer); err != nil {
		return nil, err
	}
	return s, nil
}

// Handler returns the data plane's handler: configured routes, POST
// /feedback when Options.Feedback is set, and pass-through to the
// incumbent for everything else. Each request runs on the runtime current
// when it arrives, to its end.
func (s *Server) Handler() http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if looped(r.Header, s.pseudonym) {
			s.m.loops.Inc()
			writeLoop(w)
			return
		}
		rt := s.rt.Load()
		bodyDeadline(w, r, rt.readBody)
		rt.router.ServeHTTP(w, r)
	})
}

// Apply validates cfg and, when the data plane can run it, switches to it
// atomically: requests already in flight finish on the old one. On error
// the old configuration stays in force; the error wraps ErrConfig and
// names every problem with its key path. Zero fields get config's
// documented defaults. cfg must not be modified afterwards.
func (s *Server) Apply(cfg *config.Config) error {
	if cfg == nil {
		return fmt.Errorf("proxy: %w: config is nil", ErrConfig)
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	rt, err := s.build(cfg)
	if err != nil {
		return err
	}
	s.bodies.limit.Store(rt.inFlight)
	old := s.rt.Swap(rt)
	if old != nil {
		for _, ro := range old.routes {
			if !rt.hasRoute(ro.path) {
				s.m.forgetRoute(ro.path)
			}
		}
	}
	return nil
}

// LastReached returns when the incumbent and the challenger last sent an
// HTTP response (of any status) on a configured route; zero if never.
func (s *Server) LastReached() (incumbent, challenger time.Time) {
	return unixTime(s.lastIncumbent.Load()), unixTime(s.lastChallenger.Load())
}

func unixTime(ns int64) time.Time {
	if ns == 0 {
		return time.Time{}
	}
	return time.Unix(0, ns)
}

func (s *Server) reached(b *backend) {
	now := s.now().UnixNano()
	if b.name == "challenger" {
		s.lastChallenger.Store(now)
	} else {
		s.lastIncumbent.Store(now)
	}
}

// configError joins problems into one error that wraps ErrConfig.
func configError(problems []string) error {
	if len(problems) == 0 {
		return nil
	}
	errs := make([]error, len(problems))
	for i, p := range problems {
		errs[i] = fmt.Errorf("proxy: %w: %s", ErrConfig, p)
	}
	return errors.Join(errs...)
}
