package postgres

import (
	"context"
	"testing"
	"time"

	"riffle/store"
	"riffle/store/postgres/pgtest"
	"riffle/store/storetest"
)

// openTest opens a store on a database of the test's own.
func openTest(t *testing.T, o store.Options) *Store {
	t.Helper()
	return openURL(t, pgtest.Database(t), o)
}

// openURL opens a store on url and closes it on cleanup.
func openURL(t *testing.T, url string, o store.Options) *Store {
	t.Helper()
	st, err := Open(context.Background(), Config{URL: url, Options: o, PendingWait: 300 * time.Millisecond})
	if err != nil {
		t.Fatalf("Open: %v", err)
	}
	t.Cleanup(func() {
		if err := st.Close(); err != nil {
			t.Errorf("Close: %v", err)
		}
	})
	return st
}

// TestConformance runs the store contract's suite against PostgreSQL.
func TestConformance(t *testing.T) {
	storetest.Run(t, func(t *testing.T, o store.Options) store.Contract { return openTest(t, o) })
}
