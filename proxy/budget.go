package proxy

import (
	"context"
	"errors"
	"io"
	"sync/atomic"
)

// errBudget is a challenger answer refused because the bytes held by
// backend answers in flight would pass backend_bytes_in_flight.
var errBudget = errors.New("backend answers in flight are over the backend_bytes_in_flight budget")

// errBomb is a challenger answer that inflates like a decompression bomb.
var errBomb = errors.New("gzip body inflates over 100 times its size: refused as a decompression bomb")

// A challenger's gzip answer that has inflated past bombFloor bytes to
// over bombRatio times its compressed size is refused before it is held
// any longer. JSON lists compress about 5-20 times (common practice;
// a value recalled from experience, not measured on a corpus), DEFLATE
// at most about 1032 times (RFC 1951's longest match, 258 bytes, in under
// two bits; recalled): only a degenerate answer passes 100, and refusing a
// challenger answer costs nothing but the incumbent's list being served.
// It spares the CPU and allocations a bomb forces up to max_backend_bytes,
// which under concurrency delayed the incumbent's answers past their
// deadline.
const (
	bombFloor = 256 << 10
	bombRatio = 100
)

// budgetStep is how many bytes a body reserves at a time and the most one
// Read may inflate between two checks of the deadline and the budget.
const budgetStep = 64 << 10

// budget counts the bytes held by backend answer bodies in flight. Strict
// (challenger) reservations fail past the limit; forced (incumbent) ones
// always succeed and are counted, so the live service never waits or fails
// because of the challenger. It is safe for concurrent use.
type budget struct {
	limit atomic.Int64
	used  atomic.Int64
	max   atomic.Int64 // highest used seen, for tests and the metric
}

// reserve takes n bytes; a strict reservation fails when it would pass
// the limit.
func (b *budget) reserve(n int64, strict bool) bool {
	for {
		u := b.used.Load()
		if strict && u+n > b.limit.Load() {
			return false
		}
		if b.used.CompareAndSwap(u, u+n) {
			b.raise(u + n)
			return true
		}
	}
}

func (b *budget) raise(u int64) {
	for m := b.max.Load(); u > m && !b.max.CompareAndSwap(m, u); m = b.max.Load() {
	}
}

// release returns n bytes.
func (b *budget) release(n int64) {
	if n != 0 {
		b.used.Add(-n)
	}
}

// peak returns the most bytes held at once so far.
func (b *budget) peak() int64 { return b.max.Load() }

// bodyReader reads a backend body (after decoding) under the call's
// context and the budget: every Read checks the deadline first, inflates
// at most budgetStep bytes, and reserves what it reads, so neither a slow
// body nor a gzip bomb outlives the deadline or the budget.
type bodyReader struct {
	ctx    context.Context
	r      io.Reader
	b      *budget
	strict bool
	held   *int64 // reserved so far; released with the exchange
	read   int64
	// zin, for a gzip body, counts the compressed bytes read from the wire.
	zin *countingReader
}

// countingReader counts the bytes read through it.
type countingReader struct {
	r io.Reader
	n int64
}

func (c *countingReader) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	c.n += int64(n)
	return n, err
}

func (br *bodyReader) Read(p []byte) (int, error) {
	if err := br.ctx.Err(); err != nil {
		return 0, err
	}
	if len(p) > budgetStep {
		p = p[:budgetStep]
	}
	if br.strict && br.zin != nil && br.read > bombFloor && br.read > bombRatio*br.zin.n {
		return 0, errBomb
	}
	if br.read+int64(len(p)) > *br.held {
		if !br.b.reserve(budgetStep, br.strict) {
			return 0, errBudget
		}
		*br.held += budgetStep
	}
	n, err := br.r.Read(p)
	br.read += int64(n)
	return n, err
}
