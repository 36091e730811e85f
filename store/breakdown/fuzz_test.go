package breakdown

import (
	"strings"
	"testing"
)

// FuzzRead checks that any input either reads or fails without a fault, and
// that what reads is consistent: open and finalised impressions never
// outnumber the interleaved ones.
func FuzzRead(f *testing.F) {
	for _, l := range strings.Split(fixture(), "\n") {
		f.Add(l)
	}
	f.Add(`{"experiment":"seedling","time":"2026-03-14T09:00:00Z","slots":[{"team":"challenger"}],"events":[{"event":"click","slot":9}],"outcome":"tie"}`)
	f.Fuzz(func(t *testing.T, in string) {
		b, err := Read(strings.NewReader(in), "seedling")
		if err != nil {
			return
		}
		if b.Open+int64(len(b.Finals)) > b.Interleaved || b.Interleaved > b.Impressions {
			t.Errorf("open %d + finals %d > interleaved %d, or interleaved > impressions %d", b.Open, len(b.Finals), b.Interleaved, b.Impressions)
		}
	})
}
