package postgres

import (
	"context"
	"errors"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"

	"riffle/store"
	"riffle/store/postgres/pgtest"
	"riffle/store/storetest"
)

// TestConcurrentMigrations starts three stores on one empty database at
// once: the advisory lock lets one apply the schema, and none fails.
func TestConcurrentMigrations(t *testing.T) {
	url := pgtest.Database(t)
	var wg sync.WaitGroup
	stores := make([]*Store, 3)
	errs := make([]error, 3)
	for i := range stores {
		wg.Add(1)
		go func() {
			defer wg.Done()
			stores[i], errs[i] = Open(context.Background(), Config{URL: url, Options: store.Options{FinalizeEvery: -1}})
		}()
	}
	wg.Wait()
	for i, st := range stores {
		if errs[i] != nil {
			t.Errorf("store %d: %v", i, errs[i])
			continue
		}
		defer st.Close()
	}
	conn, err := pgx.Connect(t.Context(), url)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close(context.Background())
	var n, top int
	if err := conn.QueryRow(t.Context(), `SELECT count(*), max(version) FROM riffle_schema`).Scan(&n, &top); err != nil {
		t.Fatal(err)
	}
	ms, _ := loadMigrations(migrationFiles)
	if n != len(ms) || top != len(ms) {
		t.Errorf("riffle_schema holds %d rows up to version %d; want each of the %d migrations once", n, top, len(ms))
	}
}

// TestNewerSchemaRefused marks the database as migrated by a newer riffle.
func TestNewerSchemaRefused(t *testing.T) {
	url := pgtest.Database(t)
	openURL(t, url, store.Options{FinalizeEvery: -1})
	conn, err := pgx.Connect(t.Context(), url)
	if err != nil {
		t.Fatal(err)
	}
	defer conn.Close(context.Background())
	if _, err := conn.Exec(t.Context(), `INSERT INTO riffle_schema (version, name) VALUES (999, '0999_future.sql')`); err != nil {
		t.Fatal(err)
	}
	for _, ro := range []bool{false, true} {
		_, err := Open(t.Context(), Config{URL: url, Options: store.Options{FinalizeEvery: -1, ReadOnly: ro}})
		if !errors.Is(err, store.ErrSchema) || !strings.Contains(err.Error(), "version 999") {
			t.Errorf("read-only %v: Open = %v; want ErrSchema naming version 999", ro, err)
		}
	}
}

// TestFeedbackThroughAnotherSidecar serves an impression on sidecar A,
// whose writer has not written it yet, and sends its click to sidecar B:
// B waits for it instead of refusing it as unknown.
func TestFeedbackThroughAnotherSidecar(t *testing.T) {
	url := pgtest.Database(t)
	clk := &storetest.Clock{}
	clk.Set(storetest.T0)
	a := openURL(t, url, store.Options{Now: clk.Now, FinalizeEvery: -1, Interval: 150 * time.Millisecond})
	b := openURL(t, url, store.Options{Now: clk.Now, FinalizeEvery: -1})
	im := storetest.TeamDraft(storetest.T0, 1, 7)
	if !a.Record(im) {
		t.Fatal("Record = false")
	}
	errs := b.AddEvents(t.Context(), []store.Event{{Impression: im.ID, Item: "b1", Type: "click", Time: storetest.T0.Add(time.Second)}})
	if errs[0] != nil {
		t.Fatalf("click through sidecar B on A's queued impression: %v", errs[0])
	}
	if n, err := a.Finalize(t.Context(), storetest.T0.Add(time.Hour)); n != 1 || err != nil {
		t.Fatalf("Finalize on A = %d, %v", n, err)
	}
	for _, st := range []*Store{a, b} {
		agg, err := st.Aggregate(t.Context(), storetest.Experiment)
		if err != nil || agg.Outcomes[2] != 1 || agg.Impressions != 1 {
			t.Errorf("sidecar %s: %+v, %v; want the one challenger win on both", st.Sidecar(), agg, err)
		}
	}
}

// TestDatabaseOutage closes the database to new connections and ends the
// store's sessions: Record keeps queueing, feedback gets ErrUnavailable,
// and once the database is back the queued impressions are written and
// the retried feedback is accepted.
func TestDatabaseOutage(t *testing.T) {
	url := pgtest.Database(t)
	name := url[strings.LastIndex(url, "/")+1:]
	if i := strings.IndexByte(name, '?'); i >= 0 {
		name = name[:i]
	}
	st := openURL(t, url, store.Options{FinalizeEvery: -1, Timeout: 500 * time.Millisecond})
	admin := func(sql string) {
		t.Helper()
		conn, err := pgx.Connect(t.Context(), pgtest.Server(t))
		if err != nil {
			t.Fatal(err)
		}
		defer conn.Close(context.Background())
		if _, err := conn.Exec(t.Context(), sql); err != nil {
			t.Fatalf("%s: %v", sql, err)
		}
	}
	before := storetest.TeamDraft(time.Now(), 1, 7)
	if !st.Record(before) || st.Flush(t.Context()) != nil {
		t.Fatal("could not write before the outage")
	}
	admin("ALTER DATABASE " + name + " ALLOW_CONNECTIONS false")
	admin("SELECT pg_terminate_backend(pid) FROM pg_stat_activity WHERE datname = '" + name + "'")
	during := storetest.TeamDraft(time.Now(), 2, 8)
	if !st.Record(during) {
		t.Fatal("Record during the outage = false; the queue should absorb it")
	}
	ev := store.Event{Impression: before.ID, Item: "b1", Type: "click", Key: "outage-1"}
	if err := st.AddEvents(t.Context(), []store.Event{ev})[0]; !errors.Is(err, store.ErrUnavailable) {
		t.Fatalf("AddEvents during the outage = %v; want ErrUnavailable", err)
	}
	if st.Available() {
		t.Error("Available() = true during the outage")
	}
	admin("ALTER DATABASE " + name + " ALLOW_CONNECTIONS true")
	deadline := time.Now().Add(10 * time.Second)
	for st.Flush(t.Context()) != nil && time.Now().Before(deadline) {
		time.Sleep(100 * time.Millisecond) // the writer retries with backoff
	}
	if err := st.AddEvents(t.Context(), []store.Event{ev})[0]; err != nil {
		t.Fatalf("retried AddEvents after the outage: %v", err)
	}
	agg, err := st.Aggregate(t.Context(), storetest.Experiment)
	if err != nil || agg.Impressions != 2 {
		t.Errorf("after the outage: %+v, %v; want both impressions written", agg, err)
	}
}
