package feedback

import (
	"io"
	"net/http"
	"runtime"
	"strings"
	"sync"
	"testing"
	"time"
)

// TestReplyBounded posts 1 MiB of "x\n" lines, each one a malformed event.
// Every rejected line used to be echoed: a 49.7 MB answer and +366 MB RSS
// for one request, 5.6 GB for 16 at once. The answer must list at most
// MaxListed lines, count them all by reason, say it is truncated, and stay
// small; 16 such requests at once must keep the heap within a small
// multiple of max_body_bytes each (bound: 4 x 1 MiB per request, plus the
// garbage collector's 4 MiB floor; the runtime's own figure, sampled every
// millisecond).
func TestReplyBounded(t *testing.T) {
	if testing.Short() {
		t.Skip("memory test skipped in -short mode")
	}
	f := newFixture(t, Options{})
	body := strings.Repeat("x\n", 1<<19) // 1 MiB, the default body limit
	const concurrent = 16
	var ms runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&ms)
	base, peak := ms.HeapAlloc, ms.HeapAlloc
	stop := make(chan struct{})
	var sampler sync.WaitGroup
	sampler.Go(func() {
		for {
			select {
			case <-stop:
				return
			case <-time.After(time.Millisecond):
			}
			var m runtime.MemStats
			runtime.ReadMemStats(&m)
			peak = max(peak, m.HeapAlloc)
		}
	})
	sizes := make([]int, concurrent)
	var wg sync.WaitGroup
	for i := range concurrent {
		wg.Go(func() {
			resp, err := http.Post(f.srv.URL, "application/x-ndjson", strings.NewReader(body))
			if err != nil {
				t.Error(err)
				return
			}
			b, _ := io.ReadAll(resp.Body)
			resp.Body.Close()
			sizes[i] = len(b)
		})
	}
	wg.Wait()
	close(stop)
	sampler.Wait()
	status, r := f.post(t, body)
	t.Logf("answer %d bytes; heap peak +%.1f MiB over %d requests at once", sizes[0], float64(peak-base)/(1<<20), concurrent)
	if status != http.StatusBadRequest || r.RejectedTotal != 1<<19 || r.RejectedByReason[reasonMalformed] != 1<<19 ||
		len(r.Rejected) != MaxListed || !r.Truncated || r.Rejected[0].Line != 1 {
		t.Errorf("answer %d: total %d, by reason %v, %d listed, truncated %v; want 400 counting all %d as malformed, %d listed, truncated",
			status, r.RejectedTotal, r.RejectedByReason, len(r.Rejected), r.Truncated, 1<<19, MaxListed)
	}
	if sizes[0] > 16<<10 {
		t.Errorf("answer is %d bytes; want under 16 KiB", sizes[0])
	}
	if grew, bound := peak-base, uint64(concurrent*4<<20+4<<20); grew > bound {
		t.Errorf("heap grew by %d bytes for %d requests; want at most %d", grew, concurrent, bound)
	}
}
