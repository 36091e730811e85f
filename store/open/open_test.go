package open

import (
	"path/filepath"
	"testing"
	"time"

	"riffle/store"
)

func TestIsURL(t *testing.T) {
	for target, want := range map[string]bool{
		"riffle.db": false, "/var/lib/riffle/riffle.db": false, "postgres.db": false,
		"postgres://riffle@db:5432/riffle": true, "postgresql://db/riffle": true, "POSTGRES://db/x": true,
		"mysql://db/x": false,
	} {
		if got := IsURL(target); got != want {
			t.Errorf("IsURL(%q) = %v, want %v", target, got, want)
		}
	}
}

// TestFileRoundTrip opens a file live, records, closes it, and reads it
// back read-only through the same opener.
func TestFileRoundTrip(t *testing.T) {
	path := filepath.Join(t.TempDir(), "riffle.db")
	st, err := Live(t.Context(), path, Options{Store: store.Options{FinalizeEvery: -1}})
	if err != nil {
		t.Fatal(err)
	}
	im := &store.Impression{ID: store.NewID(time.Date(2026, 5, 2, 8, 0, 0, 0, time.UTC)), Experiment: "spring-refresh", Fallback: "ramp"}
	if !st.Record(im) {
		t.Fatal("Record = false")
	}
	if err := st.Close(); err != nil {
		t.Fatal(err)
	}
	ro, err := ReadOnly(t.Context(), path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer ro.Close()
	a, err := ro.Aggregate(t.Context(), "spring-refresh")
	if err != nil || a.Impressions != 1 {
		t.Errorf("read back: %+v, %v; want 1 impression", a, err)
	}
}
