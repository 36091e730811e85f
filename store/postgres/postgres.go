// Package postgres is riffle's shared store: the store.Contract on a
// PostgreSQL database, so that a fleet of sidecars runs one experiment.
// Every sidecar serves from its own bounded queue and writer (the data
// plane never waits for the database), accepts feedback for an impression
// any sidecar served, finalises impressions that no other sidecar has
// claimed (FOR UPDATE SKIP LOCKED), and reads the fleet's totals, so
// every sidecar's verdict is the same.
//
// The schema is versioned: numbered .sql files embedded in the binary,
// applied at start under an advisory lock; a database with a newer schema
// is refused. The SQL keeps to what PostgreSQL-compatible distributed
// engines also run: COPY, ON CONFLICT, FOR UPDATE SKIP LOCKED, advisory
// locks for migrations, partial unique indexes.
package postgres

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"errors"
	"fmt"
	"log/slog"
	"sync"
	"sync/atomic"
	"time"

	"github.com/jackc/pgx/v5/pgconn"
	"github.com/jackc/pgx/v5/pgxpool"

	"riffle/store"
)

// Config says which database to use and how.
type Config struct {
	// URL is the postgres:// or postgresql:// connection URL (any libpq
	// parameter pgx reads, e.g. sslmode, pool_max_conns).
	URL string
	// Password is used when the URL carries none (from
	// store_password_file); without either, pgx reads PGPASSWORD.
	Password string
	// Options are the store options every store takes. Timeout bounds
	// connecting and each read (default 5s here).
	Options store.Options
	// PendingWait bounds how long an event waits for an impression that
	// is not in the database yet but was served in the last PendingAge:
	// another sidecar may still hold it in its queue. Default 2s.
	PendingWait time.Duration
	// PendingAge is how recent an impression must be for its event to
	// wait. Default 1m.
	PendingAge time.Duration
}

// Store is the shared store. Its methods are safe for concurrent use.
type Store struct {
	pool     *pgxpool.Pool
	opt      store.Options
	cfg      Config
	rules    atomic.Pointer[store.Rules]
	sidecar  string // this sidecar's id, on every impression it writes
	database string // the database's id (riffle_meta)
	m        *metrics
	log      *slog.Logger
	ready    atomic.Bool // the schema is known to be current
	up       atomic.Bool // the last database call succeeded

	mu     sync.RWMutex // guards closed against Record, AddEvents and Flush
	closed bool

	queue   chan *store.Impression
	flushes chan chan error
	quit    chan struct{}
	done    chan struct{}
	lastErr error
	stop    context.CancelFunc
	loop    sync.WaitGroup
}

var _ store.Contract = (*Store)(nil)

// Open connects to the database and, unless read-only, applies the
// migrations and starts the writer and the background pass. A database
// that cannot be reached within the timeout is an error wrapping
// store.ErrUnavailable; a newer schema store.ErrSchema; a read-only open
// of a database without the current schema store.ErrNotStore or
// store.ErrSchema.
func Open(ctx context.Context, c Config) (*Store, error) {
	s, err := connect(ctx, c)
	if err != nil {
		return nil, err
	}
	if err := s.prepare(ctx); err != nil {
		s.pool.Close()
		return nil, err
	}
	if s.opt.ReadOnly {
		return s, nil
	}
	if s.m, err = newMetrics(s.opt.Registerer, s); err != nil {
		s.pool.Close()
		return nil, fmt.Errorf("store postgres: %w", err)
	}
	s.start()
	return s, nil
}

// connect parses the URL and builds the pool.
func connect(ctx context.Context, c Config) (*Store, error) {
	opt, err := withDefaults(c.Options)
	if err != nil {
		return nil, err
	}
	pc, err := pgxpool.ParseConfig(c.URL)
	if err != nil {
		// pgx's message redacts the password.
		return nil, fmt.Errorf("store postgres: parse the URL: %w", err)
	}
	if c.Password != "" && pc.ConnConfig.Password == "" {
		pc.ConnConfig.Password = c.Password
	}
	if pc.ConnConfig.ConnectTimeout == 0 || pc.ConnConfig.ConnectTimeout > opt.Timeout {
		pc.ConnConfig.ConnectTimeout = opt.Timeout
	}
	if c.PendingWait <= 0 {
		c.PendingWait = 2 * time.Second
	}
	if c.PendingAge <= 0 {
		c.PendingAge = time.Minute
	}
	pool, err := pgxpool.NewWithConfig(ctx, pc)
	if err != nil {
		return nil, fmt.Errorf("store postgres: %w", err)
	}
	s := &Store{pool: pool, opt: opt, cfg: c, sidecar: newSidecarID(), log: opt.Logger}
	s.rules.Store(&opt.Rules)
	return s, nil
}

// prepare applies the migrations (or, read-only, checks the schema) and
// reads the database's id.
func (s *Store) prepare(ctx context.Context) error {
	ctx, cancel := context.WithTimeout(ctx, s.opt.Timeout)
	defer cancel()
	ms, err := loadMigrations(migrationFiles)
	if err != nil {
		return err
	}
	if s.opt.ReadOnly {
		v, err := schemaVersion(ctx, s.pool)
		switch {
		case err != nil:
			return err
		case v == 0:
			return fmt.Errorf("store postgres: %w: the database has no riffle schema (a sidecar creates it at start)", store.ErrNotStore)
		case v != len(ms):
			if err := checkVersion(v, len(ms)); err != nil {
				return err
			}
			return fmt.Errorf("store postgres: %w: the database's riffle schema is version %d, this riffle reads %d; start a sidecar of this version to migrate it", store.ErrSchema, v, len(ms))
		}
	} else if err := migrate(ctx, s.pool, ms); err != nil {
		return err
	}
	if err := s.pool.QueryRow(ctx, sqlDatabaseID).Scan(&s.database); err != nil {
		return fmt.Errorf("store postgres: read riffle_meta: %w", err)
	}
	s.ready.Store(true)
	s.up.Store(true)
	return nil
}

const sqlDatabaseID = `SELECT value FROM riffle_meta WHERE key = 'database'`

// withDefaults applies store.Options' defaults and this store's own.
func withDefaults(o store.Options) (store.Options, error) {
	if o.Timeout <= 0 {
		o.Timeout = 5 * time.Second
	}
	ro := o.ReadOnly
	file, err := store.DefaultOptions(o)
	file.ReadOnly = ro
	return file, err
}

// newSidecarID returns a fresh sidecar id: 16 hex digits.
func newSidecarID() string {
	b := make([]byte, 8)
	_, _ = rand.Read(b)
	return hex.EncodeToString(b)
}

// Instance returns the database's id: every sidecar on one database
// reports the same, so riffle report refuses to count it twice.
func (s *Store) Instance() (string, error) { return "postgres-" + s.database, nil }

// Sidecar returns this sidecar's id, written on every impression it serves.
func (s *Store) Sidecar() string { return s.sidecar }

// SetRules replaces the attribution rules atomically (hot reload).
func (s *Store) SetRules(r store.Rules) error {
	o, err := store.DefaultOptions(store.Options{Rules: r})
	if err != nil {
		return err
	}
	s.rules.Store(&o.Rules)
	return nil
}

// Available reports whether the last call to the database succeeded.
func (s *Store) Available() bool { return s.up.Load() }

// start launches the writer and the background pass.
func (s *Store) start() {
	s.queue = make(chan *store.Impression, s.opt.QueueSize)
	s.flushes = make(chan chan error)
	s.quit = make(chan struct{})
	s.done = make(chan struct{})
	go s.writer()
	ctx, cancel := context.WithCancel(context.Background())
	s.stop = cancel
	if s.opt.FinalizeEvery > 0 {
		s.loop.Add(1)
		go s.background(ctx)
	}
}

// Close stops the background pass, writes what is queued (waiting at
// most the timeout for the database; what cannot be written is counted as
// dropped) and closes the pool. It is idempotent.
func (s *Store) Close() error {
	s.mu.Lock()
	if s.closed {
		s.mu.Unlock()
		return nil
	}
	s.closed = true
	s.mu.Unlock()
	if s.quit != nil {
		s.stop()
		s.loop.Wait()
		close(s.quit)
		<-s.done
	}
	s.pool.Close()
	return s.lastErr
}

// background finalises and applies retention every FinalizeEvery.
func (s *Store) background(ctx context.Context) {
	defer s.loop.Done()
	t := time.NewTicker(s.opt.FinalizeEvery)
	defer t.Stop()
	for {
		select {
		case <-ctx.Done():
			return
		case <-t.C:
		}
		now := s.opt.Now()
		if _, err := s.Finalize(ctx, now); err != nil && ctx.Err() == nil {
			s.log.Error("store postgres: finalise", "err", err)
		}
		if _, err := s.Retain(ctx, now); err != nil && ctx.Err() == nil {
			s.log.Error("store postgres: retention", "err", err)
		}
	}
}

// dbErr marks err, from a call to the database, as the store being
// unavailable (and notes it), unless it is the caller's own cancellation.
func (s *Store) dbErr(ctx context.Context, what string, err error) error {
	if err == nil {
		s.up.Store(true)
		return nil
	}
	if ctx.Err() != nil && errors.Is(err, ctx.Err()) && !errors.Is(err, context.DeadlineExceeded) {
		return fmt.Errorf("store postgres: %s: %w", what, err)
	}
	if !unavailable(err) {
		return fmt.Errorf("store postgres: %s: %w", what, err)
	}
	s.up.Store(false)
	return fmt.Errorf("store postgres: %s: %w: %w", what, store.ErrUnavailable, err)
}

// unavailable reports whether err means the database cannot serve now
// (no connection, a timeout, shutting down, out of resources, a conflict
// to retry) rather than a statement it refused.
func unavailable(err error) bool {
	var pe *pgconn.PgError
	if !errors.As(err, &pe) {
		return true // no answer from the server: connection or timeout
	}
	switch pe.Code[:2] {
	case "08", "53", "57", "40": // connection, resources, operator intervention, rollback
		return true
	}
	return false
}
