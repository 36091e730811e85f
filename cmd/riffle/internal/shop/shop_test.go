package shop

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"net/http"
	"net/http/httptest"
	"testing"
)

func TestCatalogueIsStableAndUnique(t *testing.T) {
	a, b := NewCatalogue(7), NewCatalogue(7)
	if len(a.Items) < 200 {
		t.Fatalf("catalogue has %d items, want a few hundred", len(a.Items))
	}
	seen := map[string]bool{}
	for i, it := range a.Items {
		if seen[it.SKU] {
			t.Fatalf("duplicate sku %s", it.SKU)
		}
		seen[it.SKU] = true
		if it != b.Items[i] {
			t.Fatalf("item %d differs between two builds from one seed", i)
		}
	}
}

func TestBackendAnswersRankedList(t *testing.T) {
	c := NewCatalogue(1)
	for _, tc := range []struct {
		name string
		rank Ranker
	}{{"popularity", Popularity}, {"affinity", Affinity}} {
		t.Run(tc.name, func(t *testing.T) {
			srv := httptest.NewServer(Backend(c, tc.name, tc.rank, 0))
			defer srv.Close()
			resp, err := http.Get(srv.URL + "/v1/recommend?limit=7&context=GS-0003")
			if err != nil {
				t.Fatal(err)
			}
			defer resp.Body.Close()
			var body response
			if err := json.NewDecoder(resp.Body).Decode(&body); err != nil {
				t.Fatal(err)
			}
			if len(body.Items) != 7 || body.Model != tc.name {
				t.Fatalf("got %d items from %q, want 7 from %q", len(body.Items), body.Model, tc.name)
			}
			for _, it := range body.Items {
				if it.SKU == "GS-0003" {
					t.Errorf("context item recommended to itself")
				}
			}
		})
	}
}

// TestChallengerModestlyBetter checks the demo's premise: under the crowd's
// own click model, the affinity ranker's lists draw more expected clicks
// than the popularity ranker's, but not overwhelmingly so.
func TestChallengerModestlyBetter(t *testing.T) {
	c := NewCatalogue(1)
	r := rand.New(rand.NewPCG(3, 4))
	var inc, chal float64
	for range 2000 {
		theme := r.IntN(len(c.themes))
		ctx := c.browse(theme, r)
		inc += expectedClicks(c.ByPopularity(10, ctx.SKU), theme)
		chal += expectedClicks(c.ByAffinity(10, ctx.SKU), theme)
	}
	ratio := chal / inc
	t.Logf("challenger/incumbent expected clicks = %.2f", ratio)
	if ratio < 1.1 || ratio > 2.5 {
		t.Fatalf("challenger/incumbent expected clicks = %.2f, want modestly above 1", ratio)
	}
}

func expectedClicks(items []Item, theme int) float64 {
	var s float64
	for i, it := range items {
		s += math.Pow(1/float64(i+1), 1) * attraction(it, theme)
	}
	return s
}
