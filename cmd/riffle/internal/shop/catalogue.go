// Package shop is riffle demo's invented garden-supply shop: a catalogue of
// a few hundred invented items, two recommendation backends that rank it
// (the incumbent by popularity, the challenger by co-purchase affinity) and a
// population of synthetic shoppers who click and buy under a position-based
// click model.
//
// Everything here is invented data for the demo only. A Catalogue is
// immutable once built and safe for concurrent use.
package shop

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sort"
)

// Item is one product of the shop.
type Item struct {
	SKU        string  `json:"sku"`
	Name       string  `json:"name"`
	Category   string  `json:"category"`
	Theme      string  `json:"theme"`
	Price      float64 `json:"price"`
	Popularity float64 `json:"-"`
	theme      int
}

// Catalogue is the shop's whole assortment.
type Catalogue struct {
	Items []Item
	// byPopularity holds item indices, most popular first.
	byPopularity []int
	index        map[string]int
	themes       []string
}

var (
	themeNames = []string{"herb garden", "patio", "orchard", "pond", "vegetable bed", "wildflower meadow", "greenhouse", "rock garden"}
	categories = []struct {
		name  string
		nouns []string
		price float64
	}{
		{"seeds", []string{"Basil Seeds", "Sunflower Seeds", "Runner Bean Seeds", "Poppy Seeds", "Chive Seeds", "Cornflower Seeds"}, 3},
		{"tools", []string{"Trowel", "Hand Fork", "Pruning Shears", "Hoe", "Dibber", "Bulb Planter"}, 18},
		{"planters", []string{"Terracotta Pot", "Raised Bed", "Window Box", "Hanging Basket", "Grow Bag"}, 25},
		{"irrigation", []string{"Watering Can", "Soaker Hose", "Drip Kit", "Rain Barrel", "Mister"}, 30},
		{"soil", []string{"Potting Mix", "Leaf Mould", "Worm Castings", "Grit", "Mulch"}, 9},
		{"lighting", []string{"Solar Lantern", "Path Light", "String Lights"}, 22},
		{"wildlife", []string{"Bird Feeder", "Bee Hotel", "Hedgehog House", "Frog Shelter"}, 20},
	}
	adjectives = []string{"Copper", "Cedar", "Heritage", "Compact", "Deluxe", "Recycled", "Slate", "Willow"}
)

// NewCatalogue builds the catalogue deterministically from seed.
func NewCatalogue(seed uint64) *Catalogue {
	r := rand.New(rand.NewPCG(seed, 0x9a7de5))
	c := &Catalogue{index: map[string]int{}, themes: themeNames}
	n := 0
	for _, cat := range categories {
		for _, noun := range cat.nouns {
			for _, adj := range adjectives {
				n++
				theme := r.IntN(len(themeNames))
				it := Item{
					SKU:      fmt.Sprintf("GS-%04d", n),
					Name:     adj + " " + noun,
					Category: cat.name,
					Theme:    themeNames[theme],
					Price:    math.Round(cat.price*(0.6+r.Float64())*100) / 100,
					// Zipf-like popularity: a few best sellers, a long tail.
					Popularity: 1 / math.Pow(float64(1+r.IntN(300)), 0.8),
					theme:      theme,
				}
				c.index[it.SKU] = len(c.Items)
				c.Items = append(c.Items, it)
			}
		}
	}
	c.byPopularity = make([]int, len(c.Items))
	for i := range c.byPopularity {
		c.byPopularity[i] = i
	}
	sort.SliceStable(c.byPopularity, func(i, j int) bool {
		return c.Items[c.byPopularity[i]].Popularity > c.Items[c.byPopularity[j]].Popularity
	})
	return c
}

// Lookup returns the item with the given SKU.
func (c *Catalogue) Lookup(sku string) (Item, bool) {
	i, ok := c.index[sku]
	if !ok {
		return Item{}, false
	}
	return c.Items[i], true
}

// ByPopularity returns up to n items, most popular first, skipping exclude.
func (c *Catalogue) ByPopularity(n int, exclude string) []Item {
	out := make([]Item, 0, n)
	for _, i := range c.byPopularity {
		if len(out) == n {
			break
		}
		if c.Items[i].SKU != exclude {
			out = append(out, c.Items[i])
		}
	}
	return out
}

// ByAffinity returns up to n items ranked by co-purchase affinity with the
// context item: items of the same theme are bought together most, then items
// of the same category; popularity breaks ties.
func (c *Catalogue) ByAffinity(n int, context string) []Item {
	ctx, ok := c.Lookup(context)
	if !ok {
		return c.ByPopularity(n, "")
	}
	type scored struct {
		i int
		s float64
	}
	all := make([]scored, 0, len(c.Items))
	for i, it := range c.Items {
		if it.SKU == context {
			continue
		}
		s := it.Popularity
		if it.theme == ctx.theme {
			s += 1
		}
		if it.Category == ctx.Category {
			s += 0.3
		}
		all = append(all, scored{i, s})
	}
	sort.Slice(all, func(a, b int) bool { return all[a].s > all[b].s })
	out := make([]Item, 0, n)
	for _, sc := range all[:min(n, len(all))] {
		out = append(out, c.Items[sc.i])
	}
	return out
}
