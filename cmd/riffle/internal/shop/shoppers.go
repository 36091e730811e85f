package shop

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"net/http"
	"net/url"
	"sync"
	"sync/atomic"
	"time"
)

// Crowd configures the synthetic shoppers.
type Crowd struct {
	// Base is riffle's data-plane base URL, e.g. http://127.0.0.1:8080.
	Base string
	// Shoppers is the population size. Default 2000.
	Shoppers int
	// Workers is how many shoppers browse at once. Default 8.
	Workers int
	// Rate caps recommendation requests per second overall; 0 = no cap.
	Rate float64
	// Eta is the position-bias exponent of the click model: a shopper
	// examines rank r with probability (1/r)^Eta. Default 1.
	Eta float64
	// BuyShare is the chance a click turns into a purchase. Default 0.2.
	BuyShare float64
	// Seed makes the crowd reproducible.
	Seed uint64
	// Client is the HTTP client; nil = a client with a 2s timeout.
	Client *http.Client
}

// Tally is what the crowd saw and did.
type Tally struct {
	Requests, Impressions, Errors atomic.Int64
	Clicks, Purchases             atomic.Int64
	FeedbackAccepted              atomic.Int64
	FeedbackRejected              atomic.Int64
	// FeedbackUnanswered counts events whose request got no answer (the
	// demo stopping mid-request, riffle down): riffle counts those as
	// client-gone, neither accepted nor rejected.
	FeedbackUnanswered atomic.Int64
}

type shopper struct {
	id    string
	theme int
}

// Browse runs the crowd against riffle until ctx ends, counting into t.
// Each shopper looks at an item (usually of a theme they like), asks for
// recommendations, examines ranks under a position-based click model
// (examination (1/rank)^Eta; Chuklin, Markov & de Rijke, Click Models for
// Web Search, 2015), clicks an examined item with a probability that is
// higher for items of the theme they like, sometimes buys, and posts the
// events to /feedback as NDJSON.
func (cr Crowd) Browse(ctx context.Context, c *Catalogue, t *Tally) {
	cr = cr.withDefaults()
	r := rand.New(rand.NewPCG(cr.Seed, 0x5407))
	people := make([]shopper, cr.Shoppers)
	for i := range people {
		people[i] = shopper{id: fmt.Sprintf("shopper-%05d", i), theme: r.IntN(len(c.themes))}
	}
	var tick <-chan time.Time
	if cr.Rate > 0 {
		tk := time.NewTicker(time.Duration(float64(time.Second) / cr.Rate))
		defer tk.Stop()
		tick = tk.C
	}
	var wg sync.WaitGroup
	for w := range cr.Workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			wr := rand.New(rand.NewPCG(cr.Seed, uint64(w)+1))
			for {
				if tick != nil {
					select {
					case <-ctx.Done():
						return
					case <-tick:
					}
				}
				if ctx.Err() != nil {
					return
				}
				cr.visit(ctx, c, people[wr.IntN(len(people))], wr, t)
			}
		}()
	}
	wg.Wait()
}

func (cr Crowd) withDefaults() Crowd {
	if cr.Shoppers <= 0 {
		cr.Shoppers = 2000
	}
	if cr.Workers <= 0 {
		cr.Workers = 8
	}
	if cr.Eta == 0 {
		cr.Eta = 1
	}
	if cr.BuyShare == 0 {
		cr.BuyShare = 0.2
	}
	if cr.Client == nil {
		cr.Client = &http.Client{Timeout: 2 * time.Second}
	}
	return cr
}

// visit is one shopper's page view: ask, look, click, buy, report.
func (cr Crowd) visit(ctx context.Context, c *Catalogue, s shopper, r *rand.Rand, t *Tally) {
	contextItem := c.browse(s.theme, r)
	u := cr.Base + "/v1/recommend?limit=10&context=" + url.QueryEscape(contextItem.SKU)
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, u, nil)
	if err != nil {
		t.Errors.Add(1)
		return
	}
	req.Header.Set("Shopper-Id", s.id)
	t.Requests.Add(1)
	resp, err := cr.Client.Do(req)
	if err != nil {
		if ctx.Err() == nil {
			t.Errors.Add(1)
		}
		return
	}
	var body response
	err = json.NewDecoder(resp.Body).Decode(&body)
	resp.Body.Close()
	imp := resp.Header.Get("Riffle-Impression")
	if err != nil || resp.StatusCode != http.StatusOK {
		if ctx.Err() != nil {
			return // the run ended mid-answer
		}
		t.Errors.Add(1)
		return
	}
	if imp == "" {
		return
	}
	t.Impressions.Add(1)
	events := cr.react(c, s, body.Items, imp, r, t)
	if len(events) > 0 {
		cr.report(ctx, events, t)
	}
}

// react decides the shopper's clicks and purchases on one list.
func (cr Crowd) react(c *Catalogue, s shopper, items []Item, imp string, r *rand.Rand, t *Tally) []byte {
	var buf bytes.Buffer
	now := time.Now().UTC().Format(time.RFC3339Nano)
	for i, it := range items {
		if r.Float64() >= math.Pow(1/float64(i+1), cr.Eta) {
			continue // not examined
		}
		full, _ := c.Lookup(it.SKU)
		if r.Float64() >= attraction(full, s.theme) {
			continue
		}
		t.Clicks.Add(1)
		fmt.Fprintf(&buf, `{"impression":%q,"item":%q,"event":"click","time":%q}`+"\n", imp, it.SKU, now)
		if r.Float64() < cr.BuyShare {
			t.Purchases.Add(1)
			fmt.Fprintf(&buf, `{"impression":%q,"item":%q,"event":"purchase","time":%q}`+"\n", imp, it.SKU, now)
		}
	}
	return buf.Bytes()
}

// report posts NDJSON events to riffle's /feedback.
func (cr Crowd) report(ctx context.Context, events []byte, t *Tally) {
	req, err := http.NewRequestWithContext(ctx, http.MethodPost, cr.Base+"/feedback", bytes.NewReader(events))
	if err != nil {
		return
	}
	req.Header.Set("Content-Type", "application/x-ndjson")
	resp, err := cr.Client.Do(req)
	if err != nil {
		t.FeedbackUnanswered.Add(int64(bytes.Count(events, []byte("\n"))))
		return
	}
	defer resp.Body.Close()
	var ack struct {
		Accepted      int `json:"accepted"`
		RejectedTotal int `json:"rejected_total"`
	}
	if err := json.NewDecoder(io.LimitReader(resp.Body, 1<<20)).Decode(&ack); err == nil {
		t.FeedbackAccepted.Add(int64(ack.Accepted))
		t.FeedbackRejected.Add(int64(ack.RejectedTotal))
	} else {
		t.FeedbackUnanswered.Add(int64(bytes.Count(events, []byte("\n"))))
	}
}

// browse picks the item a shopper who likes theme is looking at: mostly one
// of that theme, sometimes anything.
func (c *Catalogue) browse(theme int, r *rand.Rand) Item {
	it := c.Items[r.IntN(len(c.Items))]
	for range 50 {
		if it.theme == theme || r.Float64() < 0.05 {
			break
		}
		it = c.Items[r.IntN(len(c.Items))]
	}
	return it
}

// attraction is the chance that a shopper who likes theme clicks it once
// examined: popular items a little more, items of the liked theme much more.
func attraction(it Item, theme int) float64 {
	a := 0.04 + 0.12*it.Popularity
	if it.theme == theme {
		a += 0.18
	}
	return a
}
