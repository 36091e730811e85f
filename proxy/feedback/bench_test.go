package feedback

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"net/http"
	"net/http/httptest"
	"path/filepath"
	"sync/atomic"
	"testing"
	"time"

	"riffle/merge"
	"riffle/store"
)

// BenchmarkFeedbackNDJSON measures events per second through POST
// /feedback on a loopback server in front of a real store file: each
// operation is one NDJSON batch of 100 keyed clicks, sent by 8 parallel
// clients, each acknowledged only after the store's fsynced commit.
//
// "recent": feedback follows the impressions, as it does in production:
// batch i names impressions drawn from the 2000 served just before it.
// "uniform": the worst case for the store's layout, every event lands on
// one of the same 1000 impressions at random, so nearly every event
// dirties a page of its own.
func BenchmarkFeedbackNDJSON(b *testing.B) {
	b.Run("recent", func(b *testing.B) { benchFeedback(b, 50*b.N+2000, 2000, 50) })
	b.Run("uniform", func(b *testing.B) { benchFeedback(b, 1000, 1000, 0) })
}

// benchFeedback records n impressions, then sends b.N batches whose
// events name impressions drawn from a window of the given size that
// advances step impressions per batch.
func benchFeedback(b *testing.B, n, window, step int) {
	st, err := store.Open(filepath.Join(b.TempDir(), "bench.db"), &store.Options{FinalizeEvery: -1})
	if err != nil {
		b.Fatal(err)
	}
	defer st.Close()
	ids := benchImpressions(b, st, n)
	srv := httptest.NewServer(New(st, Options{}))
	defer srv.Close()
	var batches, seq atomic.Int64
	b.SetParallelism(4) // 8 clients on 2 cores: commits group their batches
	b.ResetTimer()
	start := time.Now()
	b.RunParallel(func(pb *testing.PB) {
		r := rand.New(rand.NewPCG(uint64(seq.Add(1)), 7))
		var body bytes.Buffer
		for pb.Next() {
			from := int(batches.Add(1)-1) * step
			body.Reset()
			for range 100 {
				k := seq.Add(1)
				fmt.Fprintf(&body, `{"impression":%q,"item":"sku-%05d","event":"click","key":"e%x"}`+"\n",
					ids[from+r.IntN(window)], k%10, r.Uint64())
			}
			resp, err := http.Post(srv.URL, "application/x-ndjson", &body)
			if err != nil {
				b.Error(err)
				return
			}
			resp.Body.Close()
			if resp.StatusCode != http.StatusAccepted {
				b.Errorf("status %d", resp.StatusCode)
				return
			}
		}
	})
	elapsed := time.Since(start)
	b.StopTimer()
	b.ReportMetric(float64(100*b.N)/elapsed.Seconds(), "events/s")
}

// benchImpressions records n 10-slot impressions served one millisecond
// apart and returns their ids in order.
func benchImpressions(b *testing.B, st *store.Store, n int) []string {
	t0 := time.Now().Add(-time.Duration(n) * time.Millisecond)
	ids := make([]string, n)
	for i := range ids {
		at := t0.Add(time.Duration(i) * time.Millisecond)
		im := &store.Impression{ID: store.NewID(at), Time: at, Experiment: "spring-refresh", Policy: "team-draft"}
		for j := range 10 {
			im.Slots = append(im.Slots, merge.Slot{Item: fmt.Sprintf("sku-%05d", j), Team: merge.Team(j % 2), RankA: int32(j + 1)})
		}
		for !st.Record(im) {
			if err := st.Flush(b.Context()); err != nil {
				b.Fatal(err)
			}
		}
		ids[i] = im.ID.String()
	}
	if err := st.Flush(b.Context()); err != nil {
		b.Fatal(err)
	}
	return ids
}
