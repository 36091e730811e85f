package main

import (
	"net/http"
	"strconv"
	"time"
)

const (
	// routePath is the recommendation route every mode is loaded on.
	routePath = "/v1/recommend"
	// shopperHeader carries the user key; riffle's config reads it.
	shopperHeader = "Shopper-Id"
)

// backend is one model server: every request to routePath waits latency,
// as a model's inference would, then gets the precomputed answer that the
// request's shopper id selects. Other paths are 404.
func backend(bodies [][]byte, latency time.Duration) http.Handler {
	mux := http.NewServeMux()
	mux.HandleFunc(routePath, func(w http.ResponseWriter, r *http.Request) {
		if latency > 0 {
			t := time.NewTimer(latency)
			select {
			case <-t.C:
			case <-r.Context().Done():
				t.Stop()
				return
			}
		}
		b := bodies[variant(r.Header.Get(shopperHeader), len(bodies))]
		h := w.Header()
		h.Set("Content-Type", "application/json")
		h.Set("Content-Length", strconv.Itoa(len(b)))
		_, _ = w.Write(b)
	})
	return mux
}

// variant maps a shopper id to one of n answers with 32-bit FNV-1a, so a
// shopper always gets the same pair of lists from the two backends.
func variant(shopper string, n int) int {
	// The 32-bit FNV offset basis and prime as published in IETF
	// draft-eastlake-fnv; the test checks this loop against hash/fnv.
	h := uint32(2166136261)
	for i := 0; i < len(shopper); i++ {
		h ^= uint32(shopper[i])
		h *= 16777619
	}
	return int(h % uint32(n))
}
