package store_test

import (
	"path/filepath"
	"testing"

	"riffle/store"
	"riffle/store/storetest"
)

// TestConformance runs the store contract's suite against the bbolt file.
func TestConformance(t *testing.T) {
	storetest.Run(t, func(t *testing.T, o store.Options) store.Contract {
		path := filepath.Join(t.TempDir(), "riffle.db")
		st, err := store.Open(path, &o)
		if err != nil {
			t.Fatalf("Open(%s): %v", path, err)
		}
		t.Cleanup(func() {
			if err := st.Close(); err != nil {
				t.Errorf("Close: %v", err)
			}
			if err := store.Verify(path); err != nil {
				t.Errorf("Verify: %v", err)
			}
		})
		return st
	})
}
