package postgres

import (
	"context"
	"embed"
	"errors"
	"fmt"
	"io/fs"
	"path"
	"regexp"
	"slices"
	"strconv"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgconn"
	"github.com/jackc/pgx/v5/pgxpool"

	"riffle/store"
)

// migrationFiles are the schema's versions, numbered NNNN_what.sql from
// 0001 without gaps; each is applied once, in order, in its own
// transaction.
//
//go:embed migrations/*.sql
var migrationFiles embed.FS

// migration is one numbered schema change.
type migration struct {
	version int
	name    string
	sql     string
}

var migrationName = regexp.MustCompile(`^(\d{4})_[a-z0-9_]+\.sql$`)

// loadMigrations reads the embedded migrations in order and checks their
// numbering.
func loadMigrations(fsys fs.FS) ([]migration, error) {
	names, err := fs.Glob(fsys, "migrations/*.sql")
	if err != nil {
		return nil, fmt.Errorf("store postgres: migrations: %w", err)
	}
	slices.Sort(names)
	var ms []migration
	for i, name := range names {
		m := migrationName.FindStringSubmatch(path.Base(name))
		if m == nil {
			return nil, fmt.Errorf("store postgres: migration %s: want a name like 0001_init.sql", name)
		}
		v, _ := strconv.Atoi(m[1])
		if v != i+1 {
			return nil, fmt.Errorf("store postgres: migration %s: version %d, want %d (no gaps)", name, v, i+1)
		}
		b, err := fs.ReadFile(fsys, name)
		if err != nil {
			return nil, fmt.Errorf("store postgres: migration %s: %w", name, err)
		}
		ms = append(ms, migration{version: v, name: path.Base(name), sql: string(b)})
	}
	if len(ms) == 0 {
		return nil, errors.New("store postgres: no migrations embedded")
	}
	return ms, nil
}

// migrationLock is the advisory lock key that serialises migrations: the
// bytes of "riffle:m" read as a bigint.
const migrationLock int64 = 0x7269666666653a6d

const (
	sqlLock         = `SELECT pg_advisory_lock($1)`
	sqlUnlock       = `SELECT pg_advisory_unlock($1)`
	sqlSchemaTable  = `CREATE TABLE IF NOT EXISTS riffle_schema (version integer PRIMARY KEY, name text NOT NULL, applied_at timestamptz NOT NULL DEFAULT now())`
	sqlSchemaNow    = `SELECT coalesce(max(version), 0) FROM riffle_schema`
	sqlSchemaRecord = `INSERT INTO riffle_schema (version, name) VALUES ($1, $2)`
	sqlHasSchema    = `SELECT to_regclass('riffle_schema') IS NOT NULL`
)

// migrate brings the database's schema to the newest version this build
// knows, holding an advisory lock so that sidecars starting together
// apply each migration once. A database whose schema is newer than this
// build's is refused with store.ErrSchema.
func migrate(ctx context.Context, pool *pgxpool.Pool, ms []migration) error {
	conn, err := pool.Acquire(ctx)
	if err != nil {
		return fmt.Errorf("store postgres: migrate: connect: %w: %w", store.ErrUnavailable, err)
	}
	defer conn.Release()
	if _, err := conn.Exec(ctx, sqlLock, migrationLock); err != nil {
		return fmt.Errorf("store postgres: migrate: take the migration lock: %w: %w", store.ErrUnavailable, err)
	}
	defer func() {
		// A failed unlock is released with the session anyway.
		_, _ = conn.Exec(context.WithoutCancel(ctx), sqlUnlock, migrationLock)
	}()
	if _, err := conn.Exec(ctx, sqlSchemaTable); err != nil {
		return fmt.Errorf("store postgres: migrate: create riffle_schema: %w", err)
	}
	var have int
	if err := conn.QueryRow(ctx, sqlSchemaNow).Scan(&have); err != nil {
		return fmt.Errorf("store postgres: migrate: read riffle_schema: %w", err)
	}
	if err := checkVersion(have, len(ms)); err != nil {
		return err
	}
	for _, m := range ms[have:] {
		err := pgx.BeginFunc(ctx, conn, func(tx pgx.Tx) error {
			if _, err := tx.Exec(ctx, m.sql); err != nil {
				return err
			}
			_, err := tx.Exec(ctx, sqlSchemaRecord, m.version, m.name)
			return err
		})
		if err != nil {
			return fmt.Errorf("store postgres: migration %s: %w", m.name, err)
		}
	}
	return nil
}

// checkVersion refuses a schema newer than this build's.
func checkVersion(have, known int) error {
	if have > known {
		return fmt.Errorf("store postgres: %w: the database's riffle schema is version %d, this riffle knows up to %d; upgrade riffle (never let an older riffle write a newer schema)",
			store.ErrSchema, have, known)
	}
	return nil
}

// schemaVersion reads the schema version without changing anything (for
// read-only use); 0 when the database has no riffle schema.
func schemaVersion(ctx context.Context, q querier) (int, error) {
	var exists bool
	if err := q.QueryRow(ctx, sqlHasSchema).Scan(&exists); err != nil {
		return 0, fmt.Errorf("store postgres: read schema: %w: %w", store.ErrUnavailable, err)
	}
	if !exists {
		return 0, nil
	}
	var v int
	if err := q.QueryRow(ctx, sqlSchemaNow).Scan(&v); err != nil {
		return 0, fmt.Errorf("store postgres: read riffle_schema: %w", err)
	}
	return v, nil
}

// querier is what both a pool and a transaction offer.
type querier interface {
	QueryRow(ctx context.Context, sql string, args ...any) pgx.Row
	Query(ctx context.Context, sql string, args ...any) (pgx.Rows, error)
	Exec(ctx context.Context, sql string, args ...any) (pgconn.CommandTag, error)
}
