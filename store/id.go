package store

import (
	"crypto/rand"
	"crypto/sha256"
	"encoding/base32"
	"encoding/binary"
	"fmt"
	"time"
)

// ID is an impression id: 8 bytes of big-endian Unix nanoseconds followed by
// 8 random bytes, so byte order is time order and keys sort by time in the
// store.
type ID [16]byte

// idEncoding is lower-case base32 (RFC 4648 section 6 alphabet) without
// padding: 26 characters, URL and header safe.
var idEncoding = base32.NewEncoding("abcdefghijklmnopqrstuvwxyz234567").WithPadding(base32.NoPadding)

// NewID returns a fresh id for time t.
func NewID(t time.Time) ID {
	var id ID
	binary.BigEndian.PutUint64(id[:8], uint64(t.UnixNano()))
	_, _ = rand.Read(id[8:])
	return id
}

// String returns the id's 26-character text form.
func (id ID) String() string { return idEncoding.EncodeToString(id[:]) }

// Time returns the time encoded in the id.
func (id ID) Time() time.Time { return time.Unix(0, int64(binary.BigEndian.Uint64(id[:8]))) }

// Seed returns the seed an impression's random choices are derived from:
// the first 8 bytes of SHA-256 over the id's bytes.
func (id ID) Seed() uint64 {
	sum := sha256.Sum256(id[:])
	return binary.BigEndian.Uint64(sum[:8])
}

// ParseID parses the text form produced by String.
func ParseID(s string) (ID, error) {
	var id ID
	if len(s) != 26 {
		return id, fmt.Errorf("impression id %q: want 26 characters, have %d", s, len(s))
	}
	b, err := idEncoding.DecodeString(s)
	// The last character carries 2 spare bits; requiring the canonical
	// form keeps one text per id (RFC 4648 section 3.5).
	if err != nil || len(b) != 16 || idEncoding.EncodeToString(b) != s {
		return id, fmt.Errorf("impression id %q: not a riffle id", s)
	}
	copy(id[:], b)
	return id, nil
}

// HashUser returns the stored form of a user key: the first 8 bytes of
// SHA-256 over a fixed domain prefix and the key. The raw key is never
// stored. An empty key hashes to 0.
func HashUser(key string) uint64 {
	if key == "" {
		return 0
	}
	h := sha256.New()
	h.Write([]byte("riffle-user\x00"))
	h.Write([]byte(key))
	var sum [sha256.Size]byte
	v := binary.BigEndian.Uint64(h.Sum(sum[:0])[:8])
	if v == 0 {
		v = 1
	}
	return v
}
