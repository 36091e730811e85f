// Package status serves the admin listener's live status page, organised
// around the questions an engineer asks while a challenger is live: is it
// hurting anyone, how far along is the experiment, which list do users
// prefer, and why.
//
// The page is static HTML, CSS and script embedded in the binary (no
// external assets, so it works offline); it polls the experiment API and
// this package's history.json and live.json. History and Meter are safe
// for concurrent use.
package status

import (
	"context"
	"embed"
	"encoding/json"
	"net/http"
	"sync"
	"time"
)

//go:embed page.html page.js chart.js style.css
var assets embed.FS

// Point is one sample of the experiment and the sidecar.
type Point struct {
	Time time.Time `json:"time"`
	// Delta and its intervals: the always-valid one the verdict uses
	// (cs_delta) and the fixed-sample one (ci), valid at one planned look.
	Delta   float64    `json:"delta"`
	CSDelta [2]float64 `json:"cs_delta"`
	CI      [2]float64 `json:"ci"`
	PValue  float64    `json:"p_value"`
	Verdict string     `json:"verdict"`
	// Ramp is the share of users in force getting interleaved lists.
	Ramp float64 `json:"ramp"`
	// Impressions, Interleaved and WithFeedback are the experiment's
	// counts; Open counts interleaved impressions still inside their
	// attribution window.
	Impressions  int64 `json:"impressions"`
	Interleaved  int64 `json:"interleaved"`
	WithFeedback int64 `json:"with_feedback"`
	Open         int64 `json:"open"`
	// Events counts feedback events this process accepted so far.
	Events float64 `json:"events"`
	// Latency holds each backend's call latency over the interval since
	// the previous point; a backend without calls in it is absent.
	Latency map[string]Quantiles `json:"latency,omitempty"`
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

// Live is what live.json carries besides the history: the running totals
// of the problems panel and the per-position rates of the last hour.
type Live struct {
	// Window is the attribution window in force, as a Go duration.
	Window string `json:"window"`
	// Totals are this process's running counts.
	Totals Totals `json:"totals"`
	// Positions are the click and purchase counts by slot position for each
	// model's slots over impressions served since PositionsSince; absent
	// when they could not be read.
	Positions      any        `json:"positions,omitempty"`
	PositionsSince *time.Time `json:"positions_since,omitempty"`
	// Problem says why a part is missing; absent when nothing is.
	Problem string `json:"problem,omitempty"`
}

// Options are what Handler serves.
type Options struct {
	// History is served as history.json.
	History *History
	// Live returns live.json's body. If nil, live.json answers 404.
	Live func(ctx context.Context) Live
}

// Handler serves the page at its root and its data below it; mount it at
// /status/ with the prefix stripped, e.g.
// http.StripPrefix("/status", status.Handler(o)).
func Handler(o Options) http.Handler {
	mux := http.NewServeMux()
	mux.HandleFunc("GET /history.json", func(w http.ResponseWriter, r *http.Request) {
		writeJSON(w, o.History.Points())
	})
	if o.Live != nil {
		mux.HandleFunc("GET /live.json", func(w http.ResponseWriter, r *http.Request) {
			writeJSON(w, o.Live(r.Context()))
		})
	}
	for name, ctype := range map[string]string{"page.html": "text/html; charset=utf-8", "page.js": "text/javascript; charset=utf-8", "chart.js": "text/javascript; charset=utf-8", "style.css": "text/css; charset=utf-8"} {
		pattern := "GET /" + name
		if name == "page.html" {
			pattern = "GET /{$}"
		}
		mux.HandleFunc(pattern, func(w http.ResponseWriter, r *http.Request) {
			b, err := assets.ReadFile(name)
			if err != nil {
				http.Error(w, err.Error(), http.StatusInternalServerError)
				return
			}
			w.Header().Set("Content-Type", ctype)
			w.Header().Set("Cache-Control", "no-store")
			_, _ = w.Write(b)
		})
	}
	return mux
}

// ChartScript returns the charts' script and StyleSheet their style, for
// pages other than the live one (riffle report --format html) to inline.
func ChartScript() string { return mustAsset("chart.js") }

// StyleSheet returns the page's CSS, palette included.
func StyleSheet() string { return mustAsset("style.css") }

func mustAsset(name string) string {
	b, err := assets.ReadFile(name)
	if err != nil {
		panic("status: embedded " + name + " missing: " + err.Error())
	}
	return string(b)
}

func writeJSON(w http.ResponseWriter, v any) {
	w.Header().Set("Content-Type", "application/json")
	w.Header().Set("Cache-Control", "no-store")
	_ = json.NewEncoder(w).Encode(v)
}
