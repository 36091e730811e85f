// Package sidecar assembles a running riffle from its parts: config and
// reload, store, data plane, guardrails, admin listener and status page,
// with the start-up and shutdown order in one place. `riffle serve`,
// `riffle demo` and the load benchmark all run riffle through it, so they
// exercise one code path.
//
// A Sidecar's methods are safe for concurrent use once Start has returned.
package sidecar

import (
	"context"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"net"
	"net/http"
	"os"
	"os/signal"
	"sync"
	"sync/atomic"
	"syscall"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/collectors"

	"riffle/proxy"
	"riffle/proxy/admin"
	"riffle/proxy/config"
	"riffle/proxy/feedback"
	"riffle/proxy/guard"
	"riffle/proxy/status"
	"riffle/store"
	"riffle/store/open"
)

// Sidecar is one running riffle.
type Sidecar struct {
	log      *slog.Logger
	reg      *prometheus.Registry
	reloader *config.Reloader
	store    store.Contract
	proxy    *proxy.Server
	guard    *guard.Guard
	exp      *experiment
	data     *http.Server
	admin    *http.Server
	dataLn   net.Listener
	adminLn  net.Listener
	// start is when the experiment's ramp schedule started, in Unix
	// nanoseconds; a reload that sets experiment.start moves it.
	start atomic.Int64
	// hup, when set, is a SIGHUP channel subscribed before Start; nil
	// means runLoops subscribes its own.
	hup <-chan os.Signal
}

// Serve loads the config at path and runs riffle until ctx ends, then shuts
// down gracefully (stop accepting, finish requests in flight within the
// grace period, drain the store queue, close the store). Logs go to logw.
// SIGHUP reloads the config. It returns nil after a clean shutdown.
func Serve(ctx context.Context, path string, logw io.Writer) error {
	return ServeSignals(ctx, path, logw, nil)
}

// ServeSignals is Serve with the SIGHUP channel the caller subscribed
// (signal.Notify) before anything else, so a reload signal that arrives
// during start-up reloads once the sidecar runs instead of ending the
// process. A nil hup makes it Serve, which subscribes when it runs.
func ServeSignals(ctx context.Context, path string, logw io.Writer, hup <-chan os.Signal) error {
	log := slog.New(slog.NewTextHandler(logw, nil))
	cfg, err := config.Load(path)
	if err != nil {
		return err
	}
	s, err := Start(path, cfg, log)
	if err != nil {
		return err
	}
	s.hup = hup
	return s.Run(ctx)
}

// Start opens the store, builds every part from cfg (loaded from path, which
// reloads re-read) and binds both listeners, without serving yet.
func Start(path string, cfg *config.Config, log *slog.Logger) (*Sidecar, error) {
	s := &Sidecar{log: log, reg: prometheus.NewRegistry()}
	s.reg.MustRegister(collectors.NewGoCollector(), collectors.NewProcessCollector(collectors.ProcessCollectorOpts{}))
	password, err := cfg.StorePassword()
	if err != nil {
		return nil, fmt.Errorf("sidecar: %w", err)
	}
	st, err := open.Live(context.Background(), cfg.Store, open.Options{Password: password, Store: store.Options{
		QueueSize: cfg.Queue.Size, Batch: cfg.Queue.Batch, Interval: cfg.Queue.Interval,
		Rules: rulesOf(cfg), Retention: cfg.StoreRetention, Registerer: s.reg, Logger: log,
	}})
	if err != nil {
		return nil, fmt.Errorf("sidecar: %w", err)
	}
	s.store = st
	if err := s.build(path, cfg); err != nil {
		_ = st.Close()
		return nil, err
	}
	if err := s.listen(cfg); err != nil {
		_ = st.Close()
		return nil, err
	}
	return s, nil
}

// build wires the parts that sit between the store and the listeners.
func (s *Sidecar) build(path string, cfg *config.Config) error {
	s.start.Store(experimentStart(s.store, cfg, time.Now()).UnixNano())
	s.exp = newExperiment(s.store, s.reg)
	s.reloader = config.NewReloader(path, cfg, s.apply, config.ReloaderOptions{Registerer: s.reg, Logger: s.log})
	s.guard = guard.New(guardOptions(cfg, s))
	fb := feedback.New(s.store, feedback.Options{Live: s.feedbackLimits, Registerer: s.reg, Logger: s.log})
	px, err := proxy.New(proxy.Options{
		Config: cfg, Sink: s.store, Gate: s.guard, Observer: s.guard, Feedback: fb,
		Registerer: s.reg, Logger: s.log,
	})
	if err != nil {
		return fmt.Errorf("sidecar: %w", err)
	}
	s.proxy = px
	s.exp.current = s.reloader.Current
	s.exp.ramp = func() float64 { return s.guard.Ramp(time.Now()) }
	s.exp.guard = s.guard
	s.exp.page = &statusPage{meter: status.NewMeter(s.reg), store: s.store, current: s.reloader.Current}
	return nil
}

// feedbackLimits are POST /feedback's settings in the config in force.
func (s *Sidecar) feedbackLimits() feedback.Options {
	cfg := s.reloader.Current()
	return feedback.Options{MaxBodyBytes: cfg.MaxBodyBytes, ClockSkew: cfg.Feedback.ClockSkew, StoreWait: cfg.Feedback.StoreWait}
}

// apply makes a validated config live in every part; the data plane goes
// first because it is the one that can still refuse it.
func (s *Sidecar) apply(cfg *config.Config) error {
	if err := s.proxy.Apply(cfg); err != nil {
		return err
	}
	if err := s.store.SetRules(rulesOf(cfg)); err != nil {
		return fmt.Errorf("sidecar: store rules: %w", err)
	}
	if !cfg.Experiment.Start.IsZero() {
		s.start.Store(cfg.Experiment.Start.UnixNano())
	}
	s.guard.SetOptions(guardOptions(cfg, s))
	return nil
}

// listen binds the data-plane and admin listeners.
func (s *Sidecar) listen(cfg *config.Config) error {
	var err error
	if s.dataLn, err = net.Listen("tcp", cfg.Listen); err != nil {
		return fmt.Errorf("sidecar: listen %s: %w", cfg.Listen, err)
	}
	if s.adminLn, err = net.Listen("tcp", cfg.Admin); err != nil {
		_ = s.dataLn.Close()
		return fmt.Errorf("sidecar: admin listen %s: %w", cfg.Admin, err)
	}
	s.data = &http.Server{Handler: s.proxy.Handler(), ReadHeaderTimeout: headerTimeout(cfg), IdleTimeout: 2 * time.Minute}
	s.admin = &http.Server{Handler: s.adminHandler(cfg), ReadHeaderTimeout: headerTimeout(cfg)}
	return nil
}

// headerTimeout is read_header_timeout, or its default on a config built
// in code.
func headerTimeout(cfg *config.Config) time.Duration {
	if cfg.ReadHeaderTimeout > 0 {
		return cfg.ReadHeaderTimeout
	}
	return config.DefaultReadHeaderTimeout
}

// DataAddr and AdminAddr return the bound addresses.
func (s *Sidecar) DataAddr() string { return s.dataLn.Addr().String() }

// AdminAddr returns the admin listener's bound address.
func (s *Sidecar) AdminAddr() string { return s.adminLn.Addr().String() }

// Run serves until ctx ends, then shuts down in order: stop accepting and
// finish in-flight requests (within shutdown_grace), stop the loops, drain
// and close the store.
func (s *Sidecar) Run(ctx context.Context) error {
	loops, stop := context.WithCancel(context.Background())
	var wg sync.WaitGroup
	errc := make(chan error, 2)
	serve := func(srv *http.Server, ln net.Listener, name string) {
		defer wg.Done()
		if err := srv.Serve(ln); err != nil && !errors.Is(err, http.ErrServerClosed) {
			errc <- fmt.Errorf("sidecar: %s listener: %w", name, err)
		}
	}
	wg.Add(2)
	go serve(s.data, s.dataLn, "data-plane")
	go serve(s.admin, s.adminLn, "admin")
	s.runLoops(loops, &wg)
	s.log.Info("riffle serving", "listen", s.DataAddr(), "admin", s.AdminAddr(),
		"experiment", s.reloader.Current().Experiment.Name, "config", s.reloader.Status().Hash)

	var runErr error
	select {
	case <-ctx.Done():
	case runErr = <-errc:
	}
	return errors.Join(runErr, s.shutdown(stop, &wg))
}

// runLoops starts the background loops, each joined through wg.
func (s *Sidecar) runLoops(ctx context.Context, wg *sync.WaitGroup) {
	hup, stopHup := s.hup, func() {}
	if hup == nil {
		own := make(chan os.Signal, 1)
		signal.Notify(own, syscall.SIGHUP)
		hup, stopHup = own, func() { signal.Stop(own) }
	}
	loops := []func(){
		func() {
			if err := s.reloader.Watch(ctx); err != nil {
				s.log.Warn("config file watch stopped; SIGHUP and POST /api/v1/reload still reload", "err", err)
			}
		},
		func() { s.reloader.ReloadOnSignal(ctx, hup); stopHup() },
		func() { s.guard.Run(ctx) },
		func() { s.exp.sample(ctx, 5*time.Second) },
	}
	for _, loop := range loops {
		wg.Add(1)
		go func() { defer wg.Done(); loop() }()
	}
}

// shutdown stops the listeners gracefully, then the loops, then the store.
func (s *Sidecar) shutdown(stopLoops context.CancelFunc, wg *sync.WaitGroup) error {
	grace := s.reloader.Current().ShutdownGrace
	if grace <= 0 {
		grace = config.DefaultShutdownGrace
	}
	ctx, cancel := context.WithTimeout(context.Background(), grace)
	defer cancel()
	s.log.Info("riffle shutting down", "grace", grace)
	var errs []error
	if err := s.data.Shutdown(ctx); err != nil {
		errs = append(errs, fmt.Errorf("sidecar: data-plane shutdown: %w", err))
	}
	if err := s.admin.Shutdown(ctx); err != nil {
		errs = append(errs, fmt.Errorf("sidecar: admin shutdown: %w", err))
	}
	stopLoops()
	wg.Wait()
	if err := s.store.Close(); err != nil {
		errs = append(errs, fmt.Errorf("sidecar: close store: %w", err))
	}
	s.log.Info("riffle stopped")
	return errors.Join(errs...)
}

// adminHandler builds the admin listener's routes.
func (s *Sidecar) adminHandler(cfg *config.Config) http.Handler {
	return admin.New(admin.Options{
		Metrics: s.reg,
		// The token file is re-read on every protected request, so a
		// rotated token or a reload that sets admin_token_file applies at once.
		TokenSource: func() (string, error) { return s.reloader.Current().AdminToken() },
		Pprof:       cfg.Pprof,
		Ready:       s.ready,
		Experiment:  func(ctx context.Context) (any, error) { return s.exp.status() },
		Config:      s.configStatus,
		Reloader:    s.reloader,
		Guardrails:  s.guard,
		Snapshot:    snapshotter(s.store),
		Status:      http.StripPrefix("/status", status.Handler(status.Options{History: s.exp.history, Live: s.exp.page.live})),
		Logger:      s.log,
	})
}

// ready says why the sidecar should not get traffic yet: both backends
// must have answered recently, or answer a probe now (the store is open and
// a config is loaded by construction). The challenger is not required while
// the ramp in force is 0.
func (s *Sidecar) ready(ctx context.Context) error {
	cfg := s.reloader.Current()
	inc := admin.BackendReady{Name: "incumbent", URL: cfg.Incumbent.URL, Timeout: cfg.Incumbent.Timeout,
		Last: func() time.Time { t, _ := s.proxy.LastReached(); return t }}
	checks := []func(context.Context) error{inc.Check}
	if s.guard.Ramp(time.Now()) > 0 {
		chal := admin.BackendReady{Name: "challenger", URL: cfg.Challenger.URL, Timeout: cfg.Challenger.Timeout,
			Last: func() time.Time { _, t := s.proxy.LastReached(); return t }}
		checks = append(checks, chal.Check)
	}
	return admin.AllReady(checks...)(ctx)
}

func (s *Sidecar) configStatus() admin.ConfigStatus {
	st := s.reloader.Status()
	return admin.ConfigStatus{
		Hash: st.Hash, LoadedAt: st.LoadedAt, LastError: st.LastError, LastAttempt: st.LastAttempt,
		Problems: st.Problems, Config: s.reloader.Current(),
	}
}

// snapshotter is the store's snapshot endpoint when it has one (a bbolt
// file); a shared database's copies are its own backups.
func snapshotter(st store.Contract) admin.Snapshotter {
	if sn, ok := st.(admin.Snapshotter); ok {
		return sn
	}
	return nil
}
