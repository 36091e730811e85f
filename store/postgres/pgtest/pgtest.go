// Package pgtest gives a test a PostgreSQL database of its own: a fresh
// database created on the server named by RIFFLE_TEST_POSTGRES and
// dropped when the test ends, so that packages run in parallel. Without
// the variable a test skips with a message, except under CI=true, where
// the missing database is a failure.
package pgtest

import (
	"context"
	"crypto/rand"
	"encoding/hex"
	"net/url"
	"os"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"
)

// Env is the variable holding the server's URL, e.g.
// postgres://postgres@127.0.0.1:5432/test?sslmode=disable.
const Env = "RIFFLE_TEST_POSTGRES"

// Server returns the server URL from Env, or skips (fails under CI=true).
func Server(t testing.TB) string {
	t.Helper()
	u := os.Getenv(Env)
	if u == "" {
		if os.Getenv("CI") == "true" {
			t.Fatalf("%s is not set: CI must run these tests against a real PostgreSQL (.ci/run starts one)", Env)
		}
		t.Skipf("%s is not set: skipping the PostgreSQL tests (set it to e.g. postgres://postgres@127.0.0.1:5432/test?sslmode=disable)", Env)
	}
	return u
}

// Database creates a database of the test's own and returns its URL; the
// database is dropped on cleanup.
func Database(t testing.TB) string {
	t.Helper()
	server := Server(t)
	b := make([]byte, 6)
	_, _ = rand.Read(b)
	name := "riffle_test_" + hex.EncodeToString(b)
	admin := func(sql string) {
		t.Helper()
		ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
		defer cancel()
		conn, err := pgx.Connect(ctx, server)
		if err != nil {
			t.Fatalf("pgtest: connect to %s: %v", Env, err)
		}
		defer conn.Close(ctx)
		if _, err := conn.Exec(ctx, sql); err != nil {
			t.Fatalf("pgtest: %s: %v", sql, err)
		}
	}
	// A database name cannot be a parameter; name is hex digits we made.
	admin("CREATE DATABASE " + name)
	t.Cleanup(func() { admin("DROP DATABASE IF EXISTS " + name + " WITH (FORCE)") })
	u, err := url.Parse(server)
	if err != nil {
		t.Fatalf("pgtest: %s: %v", Env, err)
	}
	u.Path = "/" + name
	return u.String()
}
