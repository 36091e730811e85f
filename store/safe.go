package store

import (
	"crypto/rand"
	"encoding/hex"
	"fmt"
	"os"
	"runtime/debug"

	bolt "go.etcd.io/bbolt"
)

// keyInstance names the meta key holding the store's instance id: random
// bytes written when the file is created, kept by snapshots, so that two
// copies of one sidecar's store can be recognised and not counted twice.
var keyInstance = []byte("instance")

// view runs fn in a read transaction and turns a bbolt panic over a
// damaged file (a truncated snapshot, say) into an error wrapping
// ErrCorrupt that names the file, instead of taking the process down. A
// read past the end of a truncated memory-mapped file faults (SIGBUS);
// debug.SetPanicOnFault makes that a recoverable panic on this goroutine.
func (s *Store) view(fn func(tx *bolt.Tx) error) (err error) {
	defer debug.SetPanicOnFault(debug.SetPanicOnFault(true))
	defer recoverCorrupt(s.path, &err)
	return s.db.View(fn)
}

// recoverCorrupt converts a panic into an ErrCorrupt error for path.
func recoverCorrupt(path string, err *error) {
	if r := recover(); r != nil {
		*err = fmt.Errorf("store %s: %w: the file is damaged or truncated (%v)", path, ErrCorrupt, r)
	}
}

// precheck rejects, before bbolt sees it, a file that cannot be a store:
// an empty file opened read-only would otherwise fail with a confusing
// write error.
func precheck(path string, readOnly bool) error {
	fi, err := os.Stat(path)
	switch {
	case err != nil && readOnly:
		return fmt.Errorf("store %s: %w", path, err)
	case err != nil:
		return nil // created by Open
	case fi.IsDir():
		return fmt.Errorf("store %s: %w (a directory)", path, ErrNotStore)
	case fi.Size() == 0 && readOnly:
		return fmt.Errorf("store %s: %w (an empty file)", path, ErrNotStore)
	}
	return nil
}

// newInstance returns a fresh instance id.
func newInstance() []byte {
	b := make([]byte, 8)
	_, _ = rand.Read(b)
	return []byte(hex.EncodeToString(b))
}

// Instance returns the store's instance id: 16 hex digits written when the
// file was created and carried by its snapshots; empty for files made
// before riffle wrote one. Reports use it to refuse counting one sidecar's
// store twice.
func (s *Store) Instance() (string, error) {
	var id string
	err := s.view(func(tx *bolt.Tx) error {
		if meta := tx.Bucket(bucketMeta); meta != nil {
			id = string(meta.Get(keyInstance))
		}
		return nil
	})
	return id, err
}
