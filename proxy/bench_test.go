package proxy

import (
	"net/http"
	"net/http/httptest"
	"testing"

	"riffle/merge"
	"riffle/store"
)

// BenchmarkAdapter measures the adapter's work on one 20-item response
// pair of about 200 bytes per item: parse both lists and splice a merged
// list into the incumbent's document.
func BenchmarkAdapter(b *testing.B) {
	inc := []byte(listBody("incumbent", skus("rake", 20)...))
	chal := []byte(listBody("challenger", skus("hose", 20)...))
	a := mustAdapter(b, "/items", "/sku")
	var di, dc listDoc
	var out []byte
	slots := make([]merge.Slot, 20)
	for i := range slots {
		slots[i] = merge.Slot{Team: merge.Team(i % 2), RankA: int32(i/2 + 1), RankB: int32(i/2 + 1)}
	}
	b.SetBytes(int64(len(inc) + len(chal)))
	b.ReportAllocs()
	for b.Loop() {
		if err := a.parse(&di, inc); err != nil {
			b.Fatal(err)
		}
		if err := a.parse(&dc, chal); err != nil {
			b.Fatal(err)
		}
		var err error
		if out, err = rewrite(out[:0], &di, &dc, slots); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkServer measures one whole interleaved request through the
// Server's handler against two loopback backends that answer 20 items.
func BenchmarkServer(b *testing.B) {
	backend := func(body []byte) string {
		srv := httptest.NewServer(http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
			w.Header().Set("Content-Type", "application/json")
			w.Write(body)
		}))
		b.Cleanup(srv.Close)
		return srv.URL
	}
	cfg := testConfig(backend([]byte(listBody("incumbent", skus("rake", 20)...))),
		backend([]byte(listBody("challenger", skus("hose", 20)...))))
	s, err := New(Options{Config: cfg, Sink: discardSink{}})
	if err != nil {
		b.Fatal(err)
	}
	h := s.Handler()
	b.ReportAllocs()
	b.RunParallel(func(pb *testing.PB) {
		req := httptest.NewRequest("GET", "/v1/recommend?n=20", nil)
		req.Header.Set("Shopper-Id", "bench")
		for pb.Next() {
			w := httptest.NewRecorder()
			h.ServeHTTP(w, req)
			if w.Code != 200 {
				b.Fatalf("status %d", w.Code)
			}
		}
	})
}

type discardSink struct{}

func (discardSink) Record(*store.Impression) bool { return true }
