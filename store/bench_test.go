package store

import (
	"fmt"
	"path/filepath"
	"runtime"
	"testing"
	"time"

	"riffle/merge"
)

// tenSlots returns a 10-slot team-draft impression at t.
func tenSlots(t time.Time) *Impression {
	im := &Impression{ID: NewID(t), Time: t, Experiment: "spring-refresh", User: uint64(t.UnixNano()) | 1, Policy: "team-draft"}
	im.Seed = im.ID.Seed()
	for i := range 10 {
		im.Slots = append(im.Slots, merge.Slot{Item: fmt.Sprintf("sku-%05d", i), Team: merge.Team(i % 2), RankA: int32(i/2 + 1), RankB: int32(i/2 + 1)})
	}
	return im
}

// BenchmarkRecord measures impressions per second through the
// group-commit writer into a real file, fsync per batch included: Record
// b.N impressions (waiting briefly whenever the queue is full, so none is
// dropped), then Flush.
func BenchmarkRecord(b *testing.B) {
	st, err := Open(filepath.Join(b.TempDir(), "bench.db"), &Options{FinalizeEvery: -1})
	if err != nil {
		b.Fatal(err)
	}
	defer st.Close()
	ims := make([]*Impression, b.N)
	for i := range ims {
		ims[i] = tenSlots(t0.Add(time.Duration(i) * time.Microsecond))
	}
	b.ResetTimer()
	start := time.Now()
	for _, im := range ims {
		for !st.Record(im) {
			runtime.Gosched()
		}
	}
	if err := st.Flush(b.Context()); err != nil {
		b.Fatal(err)
	}
	elapsed := time.Since(start)
	b.StopTimer()
	b.ReportMetric(float64(b.N)/elapsed.Seconds(), "impressions/s")
}

// BenchmarkEncodeRecord measures the provenance record's encoding: one
// 20-slot team-draft impression (the bench's page size) appended to a
// reused buffer, as the writer does for each impression it commits.
func BenchmarkEncodeRecord(b *testing.B) {
	im := tenSlots(t0)
	for i := 10; i < 20; i++ {
		im.Slots = append(im.Slots, merge.Slot{Item: fmt.Sprintf("sku-%05d", i), Team: merge.Team(i % 2), RankA: int32(i/2 + 1), RankB: int32(i/2 + 1)})
	}
	r := &record{Impression: *im}
	var buf []byte
	b.ReportAllocs()
	for b.Loop() {
		buf = encodeRecord(buf[:0], r)
	}
	b.SetBytes(int64(len(buf)))
}
