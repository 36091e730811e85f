// Package status serves the admin listener's live status page: the verdict,
// Delta with its interval over time, the ramp in force and the guardrails.
//
// The page is static HTML and script embedded in the binary; it polls the
// experiment API and this package's history endpoint. A History is safe for
// concurrent use.
package status

import (
	"embed"
	"encoding/json"
	"net/http"
	"sync"
	"time"
)

//go:embed page.html
var page embed.FS

// Point is one sample of the experiment's headline numbers.
type Point struct {
	Time    time.Time `json:"time"`
	Delta   float64   `json:"delta"`
	Lo      float64   `json:"lo"`
	Hi      float64   `json:"hi"`
	Ramp    float64   `json:"ramp"`
	N       int64     `json:"with_feedback"`
	Verdict string    `json:"verdict"`
}

// History keeps the most recent points in a ring.
type History struct {
	mu     sync.Mutex
	points []Point
	next   int
	full   bool
}

// NewHistory returns a history holding at most n points (default 720: an
// hour at one point each five seconds).
func NewHistory(n int) *History {
	if n <= 0 {
		n = 720
	}
	return &History{points: make([]Point, n)}
}

// Add appends p, overwriting the oldest point when the ring is full.
func (h *History) Add(p Point) {
	h.mu.Lock()
	defer h.mu.Unlock()
	h.points[h.next] = p
	h.next = (h.next + 1) % len(h.points)
	if h.next == 0 {
		h.full = true
	}
}

// Points returns the points oldest first.
func (h *History) Points() []Point {
	h.mu.Lock()
	defer h.mu.Unlock()
	if !h.full {
		return append([]Point(nil), h.points[:h.next]...)
	}
	out := make([]Point, 0, len(h.points))
	out = append(out, h.points[h.next:]...)
	return append(out, h.points[:h.next]...)
}

// Handler serves the page at its root and the history as JSON at
// "history.json" below it; mount it at /status/ with the prefix stripped,
// e.g. http.StripPrefix("/status", status.Handler(h)).
func Handler(h *History) http.Handler {
	mux := http.NewServeMux()
	mux.HandleFunc("GET /history.json", func(w http.ResponseWriter, r *http.Request) {
		w.Header().Set("Content-Type", "application/json")
		w.Header().Set("Cache-Control", "no-store")
		_ = json.NewEncoder(w).Encode(h.Points())
	})
	mux.HandleFunc("GET /{$}", func(w http.ResponseWriter, r *http.Request) {
		b, err := page.ReadFile("page.html")
		if err != nil {
			http.Error(w, err.Error(), http.StatusInternalServerError)
			return
		}
		w.Header().Set("Content-Type", "text/html; charset=utf-8")
		w.Header().Set("Cache-Control", "no-store")
		_, _ = w.Write(b)
	})
	return mux
}
