package guard

import (
	"fmt"
	"math"
	"slices"
	"sync"
	"sync/atomic"
	"time"
)

// The sliding window is a ring of buckets, each covering one bucket width of
// time: one second, or Window/maxBuckets rounded up to whole seconds when
// Window is longer than maxBuckets seconds. The window in force is the
// current bucket and the ones before it, so it holds between Window minus one
// bucket width and Window of history and slides in steps of one width.
//
// Each bucket counts calls, failed calls, and call durations in a fixed
// latency histogram whose upper bounds are 1ms * 2^(k/4), k = 0..63 (about
// 1ms to 55s, each bound 19% above the one before), plus the configured p99
// bound itself. Because the bound is one of the histogram's edges, "more than
// 1% of the calls took longer than the bound" is counted exactly; the p99
// value quoted in a trip's reason is the histogram bound at or above it, so
// it is accurate to within one 19% step.
const (
	maxBuckets  = 60
	histBase    = time.Millisecond
	histBounds  = 64
	histPerStep = 4 // bounds per doubling
)

// window is the ring; it is safe for concurrent use.
type window struct {
	width   int64   // bucket width in nanoseconds
	bounds  []int64 // histogram upper bounds in nanoseconds, ascending
	slowAt  int     // first histogram bucket above the latency bound
	roll    sync.Mutex
	buckets []bucket
}

// bucket holds one width of time. epoch is the bucket's start divided by
// the width; emptyEpoch marks a bucket never used.
type bucket struct {
	epoch  atomic.Int64
	calls  atomic.Uint64
	errors atomic.Uint64
	hist   []atomic.Uint64 // len(bounds)+1; the last counts calls above every bound
}

const emptyEpoch = math.MinInt64

// counts is the window's sum at one moment.
type counts struct {
	calls, errors, slow uint64
	hist                []uint64
}

// newWindow returns an empty window of length span whose histogram has
// bound among its edges (when bound > 0).
func newWindow(span, bound time.Duration) *window {
	width := time.Second
	if span > maxBuckets*time.Second {
		width = (span/maxBuckets + time.Second - 1).Truncate(time.Second)
	}
	n := int((span + width - 1) / width)
	w := &window{width: int64(width), bounds: histogramBounds(bound), buckets: make([]bucket, n)}
	w.slowAt = len(w.bounds) + 1
	if bound > 0 {
		w.slowAt = slices.Index(w.bounds, int64(bound)) + 1
	}
	cells := make([]atomic.Uint64, n*(len(w.bounds)+1))
	for i := range w.buckets {
		b := &w.buckets[i]
		b.epoch.Store(emptyEpoch)
		b.hist = cells[i*(len(w.bounds)+1) : (i+1)*(len(w.bounds)+1)]
	}
	return w
}

// histogramBounds returns the fixed bounds with bound inserted in order.
func histogramBounds(bound time.Duration) []int64 {
	b := make([]int64, 0, histBounds+1)
	for k := range histBounds {
		b = append(b, int64(float64(histBase)*math.Exp2(float64(k)/histPerStep)))
	}
	if bound > 0 {
		if i, found := slices.BinarySearch(b, int64(bound)); !found {
			b = slices.Insert(b, i, int64(bound))
		}
	}
	return b
}

// index returns the histogram bucket for d: the first i with d <= bounds[i],
// or len(bounds) when d is above them all.
func (w *window) index(d time.Duration) int {
	lo, hi := 0, len(w.bounds)
	for lo < hi {
		mid := int(uint(lo+hi) >> 1)
		if int64(d) > w.bounds[mid] {
			lo = mid + 1
		} else {
			hi = mid
		}
	}
	return lo
}

// add counts one call at now; it returns false when now is so old that its
// bucket has already been reused for a later time, and the call is dropped.
func (w *window) add(now time.Time, d time.Duration, failed bool) bool {
	e := now.UnixNano() / w.width
	b := &w.buckets[uint64(e)%uint64(len(w.buckets))]
	if cur := b.epoch.Load(); cur != e && !w.rollTo(b, e) {
		return false
	}
	b.calls.Add(1)
	if failed {
		b.errors.Add(1)
	}
	b.hist[w.index(d)].Add(1)
	return true
}

// rollTo empties b and gives it epoch e, unless another goroutine did so
// first; it returns false when b already belongs to a later epoch.
func (w *window) rollTo(b *bucket, e int64) bool {
	w.roll.Lock()
	defer w.roll.Unlock()
	switch cur := b.epoch.Load(); {
	case cur == e:
		return true
	case cur > e:
		return false
	}
	b.calls.Store(0)
	b.errors.Store(0)
	for i := range b.hist {
		b.hist[i].Store(0)
	}
	b.epoch.Store(e)
	return true
}

// sum adds up the buckets in the window that ends at now.
func (w *window) sum(now time.Time) counts {
	cur := now.UnixNano() / w.width
	oldest := cur - int64(len(w.buckets)) + 1
	c := counts{hist: make([]uint64, len(w.bounds)+1)}
	for i := range w.buckets {
		b := &w.buckets[i]
		if e := b.epoch.Load(); e < oldest || e > cur {
			continue
		}
		c.calls += b.calls.Load()
		c.errors += b.errors.Load()
		for j := range b.hist {
			c.hist[j] += b.hist[j].Load()
		}
	}
	for _, n := range c.hist[min(w.slowAt, len(c.hist)):] {
		c.slow += n
	}
	return c
}

// p99 returns the smallest histogram bound at or above the 99th percentile
// of the counted calls, and false when the percentile lies above every bound.
func (w *window) p99(c counts) (time.Duration, bool) {
	rank := (99*c.calls + 99) / 100 // ceil(0.99 * calls)
	var cum uint64
	for i, n := range c.hist {
		cum += n
		if cum >= rank && i < len(w.bounds) {
			return time.Duration(w.bounds[i]), true
		}
	}
	return time.Duration(w.bounds[len(w.bounds)-1]), false
}

func errorReason(c counts, o *Options) string {
	return fmt.Sprintf("challenger failed %d of its last %d calls (%.2f%%) within %s, above the %.2f%% error-rate bound",
		c.errors, c.calls, 100*float64(c.errors)/float64(c.calls), o.Window, 100*o.ErrorRate)
}

func latencyReason(c counts, o *Options, w *window) string {
	p, ok := w.p99(c)
	est := "at most " + p.String()
	if !ok {
		est = "above " + p.String()
	}
	return fmt.Sprintf("challenger p99 latency within %s is above the %s bound: %d of %d calls (%.2f%%) took longer (p99 %s)",
		o.Window, o.LatencyP99, c.slow, c.calls, 100*float64(c.slow)/float64(c.calls), est)
}
