package shop

import (
	"encoding/json"
	"net/http"
	"strconv"
	"time"
)

// Ranker orders the catalogue for one request.
type Ranker func(c *Catalogue, n int, context string) []Item

// Popularity is the incumbent's ranker: best sellers first.
func Popularity(c *Catalogue, n int, context string) []Item { return c.ByPopularity(n, context) }

// Affinity is the challenger's ranker: co-purchase affinity with the item
// the shopper is looking at.
func Affinity(c *Catalogue, n int, context string) []Item { return c.ByAffinity(n, context) }

// response is the backends' JSON answer.
type response struct {
	Model   string `json:"model"`
	Shopper string `json:"shopper,omitempty"`
	Context string `json:"context,omitempty"`
	Items   []Item `json:"items"`
}

// Backend returns a recommendation service for the catalogue: GET
// /v1/recommend?context=SKU&limit=N answers {"model", "items": [...]},
// GET /v1/items/{sku} answers one item, anything else 404. latency is added
// to every answer to look like a model server.
func Backend(c *Catalogue, model string, rank Ranker, latency time.Duration) http.Handler {
	mux := http.NewServeMux()
	mux.HandleFunc("/v1/recommend", func(w http.ResponseWriter, r *http.Request) {
		if latency > 0 {
			time.Sleep(latency)
		}
		n, err := strconv.Atoi(r.URL.Query().Get("limit"))
		if err != nil || n <= 0 || n > 100 {
			n = 10
		}
		ctx := r.URL.Query().Get("context")
		writeJSON(w, response{Model: model, Shopper: r.Header.Get("Shopper-Id"), Context: ctx, Items: rank(c, n, ctx)})
	})
	mux.HandleFunc("/v1/items/{sku}", func(w http.ResponseWriter, r *http.Request) {
		it, ok := c.Lookup(r.PathValue("sku"))
		if !ok {
			http.Error(w, `{"error":"no such item"}`, http.StatusNotFound)
			return
		}
		writeJSON(w, it)
	})
	return mux
}

func writeJSON(w http.ResponseWriter, v any) {
	b, err := json.Marshal(v)
	if err != nil {
		http.Error(w, err.Error(), http.StatusInternalServerError)
		return
	}
	w.Header().Set("Content-Type", "application/json")
	w.Header().Set("Content-Length", strconv.Itoa(len(b)))
	_, _ = w.Write(b)
}
