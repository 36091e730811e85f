package store

import (
	"context"
	"io"
	"time"
)

// Recorder is what the data plane needs of a store: Record hands an
// impression to a bounded queue and never blocks; it returns false when
// the impression was dropped (and counted).
type Recorder interface {
	Record(im *Impression) bool
}

// EventAdder is what POST /feedback needs of a store: AddEvents makes the
// valid events durable before it returns, with one error (or nil) per
// event; see (*Store).AddEvents for the errors. An error wrapping
// ErrUnavailable means nothing was recorded and the caller should retry.
type EventAdder interface {
	AddEvents(ctx context.Context, evs []Event) []error
}

// Reader is the read side: the experiment's counts for the verdict, the
// experiments held, and every impression as NDJSON.
type Reader interface {
	// Experiments returns the names of the experiments held, sorted.
	Experiments(ctx context.Context) ([]string, error)
	// Aggregate returns the experiment's counts; an experiment not seen
	// yet gives zero counts and no error.
	Aggregate(ctx context.Context, experiment string) (Aggregate, error)
	// Export writes the impressions served at or after since (zero: all)
	// as NDJSON, oldest first; see (*Store).Export for the line format.
	Export(ctx context.Context, w io.Writer, since time.Time) error
	// Instance identifies the store: a bbolt file's id (kept by its
	// snapshots), or the serving sidecar's id on a shared database.
	Instance() (string, error)
}

// Maintainer turns closed attribution windows into outcomes and applies
// retention. A live store runs both in its own background pass; tests and
// tools call them directly.
type Maintainer interface {
	// Finalize finalises every impression whose window closed at or
	// before now, exactly once, and returns how many it finalised.
	Finalize(ctx context.Context, now time.Time) (int, error)
	// Retain deletes final impressions (and their events) older than the
	// retention, never one still inside its window, and returns how many.
	Retain(ctx context.Context, now time.Time) (int, error)
}

// Contract is a live store as the sidecar, the admin API, the status page,
// the losing guardrail, riffle report and riffle export use it. *Store
// (the bbolt file) implements it, and so does the shared PostgreSQL store
// in store/postgres.
type Contract interface {
	Recorder
	EventAdder
	Reader
	Maintainer
	// SetRules replaces the attribution rules (hot reload).
	SetRules(r Rules) error
	// Flush makes every impression recorded before the call durable.
	Flush(ctx context.Context) error
	// Close drains the queue into a last write and releases the store;
	// it is idempotent.
	Close() error
}

var _ Contract = (*Store)(nil)

// ReadCloser is a store opened for reading, as riffle report and riffle
// export open one.
type ReadCloser interface {
	Reader
	Close() error
}
