package store

import (
	"context"
	"encoding/binary"
	"errors"
	"fmt"
	"log/slog"
	"runtime/debug"
	"strings"
	"sync"
	"sync/atomic"
	"time"

	bolt "go.etcd.io/bbolt"
	berrors "go.etcd.io/bbolt/errors"
)

// schemaVersion is the layout this build reads and writes. A file with
// another version is refused with ErrSchema rather than misread.
const schemaVersion = 1

// Bucket names. Keys in bucketImp, bucketEvents and bucketOpen sort by time
// because impression ids do.
var (
	bucketMeta   = []byte("riffle") // "schema" -> uvarint version
	bucketImp    = []byte("imp")    // id -> impression record
	bucketOpen   = []byte("open")   // time (8) + id (16) -> nothing: not yet final
	bucketEvents = []byte("events") // id (16) + sequence (8) -> event record
	bucketKeys   = []byte("keys")   // idempotency key -> id + sequence
	bucketExp    = []byte("exp")    // experiment -> bucket of its aggregates
	keySchema    = []byte("schema")
	bucketParked = []byte("parked") // open-index key -> why it could not be finalised
	allBuckets   = [][]byte{bucketImp, bucketOpen, bucketEvents, bucketKeys, bucketExp, bucketParked}
)

// Store is an open riffle store. Its methods are safe for concurrent use.
// Impressions reach the file through one writer goroutine that commits
// them in batches; events and finalisation commit in their own
// transactions. bbolt fsyncs every commit, so one fsync covers a whole
// batch of impressions, and an event is on disk when AddEvents returns nil
// for it.
type Store struct {
	db    *bolt.DB
	path  string
	opt   Options
	rules atomic.Pointer[Rules]
	m     *metrics
	log   *slog.Logger

	mu     sync.RWMutex // guards closed against Record and AddEvents
	closed bool

	queue   chan *Impression
	events  chan *eventReq
	flushes chan chan error
	quit    chan struct{} // closed by Close: the writer drains and exits
	done    chan struct{} // closed when the writer has exited
	lastErr error         // the writer's final commit; read after done
	stop    context.CancelFunc
	loop    sync.WaitGroup
}

// Open opens (creating if needed, unless read-only) the store file at path.
// A nil o means defaults. A file locked by another process gives an error
// wrapping ErrLocked once o.Timeout has passed; a file that is not a riffle
// store gives ErrNotStore; a file of another schema version gives ErrSchema.
func Open(path string, o *Options) (*Store, error) {
	opt, err := o.withDefaults()
	if err != nil {
		return nil, err
	}
	if err := precheck(path, opt.ReadOnly); err != nil {
		return nil, err
	}
	return open(path, opt)
}

// open is Open after the options and the file are checked; a bbolt panic
// over a damaged file becomes an ErrCorrupt error.
func open(path string, opt Options) (_ *Store, err error) {
	defer debug.SetPanicOnFault(debug.SetPanicOnFault(true))
	defer recoverCorrupt(path, &err)
	db, err := bolt.Open(path, 0o600, &bolt.Options{
		Timeout:      opt.Timeout,
		ReadOnly:     opt.ReadOnly,
		FreelistType: bolt.FreelistMapType,
	})
	if err != nil {
		return nil, openError(path, opt.Timeout, err)
	}
	s := &Store{db: db, path: path, opt: opt, log: opt.Logger}
	rules := opt.Rules
	s.rules.Store(&rules)
	if err := s.initSchema(); err != nil {
		_ = db.Close()
		return nil, err
	}
	if opt.ReadOnly {
		return s, nil
	}
	s.queue = make(chan *Impression, opt.QueueSize)
	if s.m, err = newMetrics(opt.Registerer, s); err != nil {
		_ = db.Close()
		return nil, fmt.Errorf("store %s: %w", path, err)
	}
	if err := s.initOutcomeMetrics(); err != nil {
		_ = db.Close()
		return nil, err
	}
	s.start()
	return s, nil
}

// openError turns bbolt's open errors into the store's sentinels.
func openError(path string, waited time.Duration, err error) error {
	switch {
	case errors.Is(err, berrors.ErrTimeout):
		return fmt.Errorf("store %s %w (waited %v for its lock)", path, ErrLocked, waited)
	case errors.Is(err, berrors.ErrInvalid), errors.Is(err, berrors.ErrVersionMismatch),
		errors.Is(err, berrors.ErrChecksum):
		return fmt.Errorf("store %s: %w (%v)", path, ErrNotStore, err)
	case strings.Contains(err.Error(), "file size too small"):
		// bbolt's own words for a file shorter than its two meta pages.
		return fmt.Errorf("store %s: %w: the file is truncated (%v)", path, ErrCorrupt, err)
	}
	return fmt.Errorf("store %s: %w", path, err)
}

// initSchema checks the schema version, and on a new writable file creates
// the buckets.
func (s *Store) initSchema() error {
	check := func(tx *bolt.Tx) error {
		meta := tx.Bucket(bucketMeta)
		if meta == nil {
			return fmt.Errorf("store %s: %w (no %q bucket)", s.path, ErrNotStore, bucketMeta)
		}
		v, n := binary.Uvarint(meta.Get(keySchema))
		if n <= 0 || v != schemaVersion {
			return fmt.Errorf("store %s: %w: file has %d, this riffle reads %d", s.path, ErrSchema, v, schemaVersion)
		}
		return nil
	}
	if s.opt.ReadOnly {
		return s.view(check)
	}
	return s.db.Update(func(tx *bolt.Tx) error {
		if tx.Bucket(bucketMeta) == nil {
			if err := tx.ForEach(func([]byte, *bolt.Bucket) error { return errors.New("has buckets") }); err != nil {
				return fmt.Errorf("store %s: %w (a bbolt file with other buckets)", s.path, ErrNotStore)
			}
			meta, err := tx.CreateBucket(bucketMeta)
			if err != nil {
				return fmt.Errorf("store %s: create schema: %w", s.path, err)
			}
			if err := meta.Put(keySchema, binary.AppendUvarint(nil, schemaVersion)); err != nil {
				return fmt.Errorf("store %s: write schema: %w", s.path, err)
			}
			if err := meta.Put(keyInstance, newInstance()); err != nil {
				return fmt.Errorf("store %s: write instance: %w", s.path, err)
			}
		}
		if err := check(tx); err != nil {
			return err
		}
		for _, name := range allBuckets {
			if _, err := tx.CreateBucketIfNotExists(name); err != nil {
				return fmt.Errorf("store %s: create bucket %s: %w", s.path, name, err)
			}
		}
		return nil
	})
}

// start launches the writer and the finalise-and-retain loop.
func (s *Store) start() {
	s.events = make(chan *eventReq, 64)
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

// Path returns the file's path.
func (s *Store) Path() string { return s.path }

// SetRules replaces the attribution rules atomically (hot reload); events
// and finalisations that started keep the rules they started with. Zero
// fields get Rules' defaults.
func (s *Store) SetRules(r Rules) error {
	r, err := r.withDefaults()
	if err != nil {
		return err
	}
	s.rules.Store(&r)
	return nil
}

// Rules returns the rules in force.
func (s *Store) Rules() Rules { return *s.rules.Load() }

// Close stops the background pass, drains the impression queue into a last
// commit, and closes the file; it returns that commit's error, if any.
// Record then returns false and AddEvents ErrClosed. Close is idempotent.
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
	if err := s.db.Close(); err != nil {
		return fmt.Errorf("store %s: close: %w", s.path, err)
	}
	return s.lastErr
}

// background finalises closed impressions and applies retention every
// FinalizeEvery until ctx is cancelled.
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
			s.log.Error("store: finalise", "path", s.path, "err", err)
		}
		if _, err := s.Retain(ctx, now); err != nil && ctx.Err() == nil {
			s.log.Error("store: retention", "path", s.path, "err", err)
		}
	}
}
