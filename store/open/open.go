// Package open opens the store that a config's store: names: a bbolt file
// path, or a postgres:// (postgresql://) URL of a database shared by a
// fleet of sidecars. It sits apart from package store so that the bbolt
// store does not import the PostgreSQL driver, and the PostgreSQL store
// can import package store.
package open

import (
	"context"
	"strings"

	"riffle/store"
	"riffle/store/postgres"
)

// Options configures Live and ReadOnly.
type Options struct {
	// Store are the options every store takes (queue, rules, retention,
	// clock, metrics, logger). ReadOnly is set by ReadOnly.
	Store store.Options
	// Password is the database password when the URL carries none (read
	// from store_password_file); empty leaves it to the URL or PGPASSWORD.
	// Ignored for a file.
	Password string
}

// IsURL reports whether target names a database rather than a file.
func IsURL(target string) bool {
	t := strings.ToLower(target)
	return strings.HasPrefix(t, "postgres://") || strings.HasPrefix(t, "postgresql://")
}

// Live opens target for a sidecar: writable, with its writer and its
// background finalise-and-retain pass running.
func Live(ctx context.Context, target string, o Options) (store.Contract, error) {
	opt := o.Store
	opt.ReadOnly = false
	if IsURL(target) {
		return postgres.Open(ctx, postgres.Config{URL: target, Password: o.Password, Options: opt})
	}
	return store.Open(target, &opt)
}

// ReadOnly opens target for reading only (riffle report, riffle export).
// o.Store.Timeout is how long to wait for a file's lock; it does not apply
// to a database.
func ReadOnly(ctx context.Context, target string, o Options) (store.ReadCloser, error) {
	opt := o.Store
	opt.ReadOnly = true
	if IsURL(target) {
		opt.Timeout = 0 // a file lock's wait; a database takes its own default bound

		return postgres.Open(ctx, postgres.Config{URL: target, Password: o.Password, Options: opt})
	}
	return store.Open(target, &opt)
}
