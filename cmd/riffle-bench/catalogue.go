package main

import (
	"encoding/json"
	"fmt"
	"math/rand/v2"
)

// item is one product of the bench's invented garden-supply shop as a
// model server returns it: about 200 bytes of JSON.
type item struct {
	SKU      string  `json:"sku"`
	Name     string  `json:"name"`
	Category string  `json:"category"`
	Price    float64 `json:"price_eur"`
	Rating   float64 `json:"rating"`
	Reviews  int     `json:"reviews"`
	InStock  bool    `json:"in_stock"`
	Blurb    string  `json:"blurb"`
	Score    float64 `json:"score"`
}

// answer is a backend's whole response document.
type answer struct {
	Model string `json:"model"`
	Items []item `json:"items"`
}

// product is a base product before sizes and finishes multiply it.
type product struct{ name, category, blurb string }

// baseRange is the shop's products before sizes and finishes.
func baseRange() []product {
	return []product{
		{"Cedar Raised Bed", "beds-and-planters", "Untreated cedar boards with tool-free corner posts."},
		{"Galvanised Watering Can", "watering", "Long spout and a removable brass rose for seedlings."},
		{"Bamboo Plant Stakes", "supports", "Bundle of straight canes for beans, tomatoes and dahlias."},
		{"Coir Seed Tray", "propagation", "Peat-free trays that break down in the bed after planting."},
		{"Copper Slug Tape", "pest-control", "Self-adhesive band that keeps slugs off pots and beds."},
		{"Willow Obelisk", "supports", "Hand-woven climbing frame for sweet peas and clematis."},
		{"Terracotta Pot", "beds-and-planters", "Frost-resistant clay pot with a drainage hole and saucer."},
		{"Slatted Compost Bin", "soil-and-compost", "Larch slats that slide out to turn and empty the heap."},
		{"Bypass Secateurs", "hand-tools", "Carbon-steel blades, sap groove and a one-hand lock."},
		{"Folding Pruning Saw", "hand-tools", "Pull-cut blade for branches up to eight centimetres."},
		{"Border Fork", "digging", "Ash handle and forged tines for lifting and dividing."},
		{"Leaf Rake", "digging", "Spring-steel fan head that gathers leaves without tearing turf."},
		{"Timber Cold Frame", "propagation", "Twin-wall lids prop open to harden off young plants."},
		{"Rain Barrel", "watering", "Recycled-plastic water butt with a tap and a child-safe lid."},
		{"Trellis Panel", "supports", "Pressure-treated lattice for fences and walls."},
		{"Stone Bird Bath", "wildlife", "Cast-stone bowl on a pedestal, shallow enough for finches."},
		{"Hanging Basket", "beds-and-planters", "Wire frame with a wool liner that holds water longer."},
		{"Hedgehog House", "wildlife", "Dome of woven willow with a tunnel entrance against foxes."},
		{"Soaker Hose", "watering", "Porous hose that weeps water along the row, no spray."},
		{"Kneeling Pad", "comfort", "Closed-cell foam that stays dry on wet ground."},
		{"Seed Potato Sack", "propagation", "Breathable grow bag with a flap for harvesting early."},
		{"Garden Twine", "supports", "Jute twine on a spool, soft on stems and compostable."},
		{"Worm Farm", "soil-and-compost", "Stacking trays turn kitchen scraps into worm casts."},
		{"Cloche Tunnel", "propagation", "Hooped fleece tunnel that keeps frost off early rows."},
	}
}

// catalogue is the shop's full range: every product in every size and
// finish, with stable SKUs and prices drawn from a fixed seed.
func catalogue() []item {
	products := baseRange()
	sizes := []string{"Small", "Medium", "Large", "Extra Large"}
	finishes := []string{"Natural", "Sage", "Slate", "Terracotta"}
	rng := rand.New(rand.NewPCG(7, 11))
	items := make([]item, 0, len(products)*len(sizes)*len(finishes))
	for pi, p := range products {
		for si, s := range sizes {
			for fi, f := range finishes {
				sku := fmt.Sprintf("GS-%02d%d%d", pi, si, fi)
				items = append(items, item{
					SKU:      sku,
					Name:     fmt.Sprintf("%s, %s, %s", p.name, s, f),
					Category: p.category,
					Price:    float64(299+rng.IntN(15000)) / 100,
					Rating:   float64(30+rng.IntN(21)) / 10,
					Reviews:  rng.IntN(900),
					InStock:  rng.IntN(10) > 0,
					Blurb:    p.blurb,
				})
			}
		}
	}
	return items
}

// listLen is how many items every backend answer holds.
const listLen = 20

// variants is how many distinct answers each backend precomputes; a
// request picks one by its shopper id, so the proxies merge many different
// pairs of lists rather than one.
const variants = 64

// bodies precomputes both backends' answers. Pair i shares between 6 and
// 14 of its 20 items (in a different order), so the lists partly overlap as
// an incumbent's and a retrained challenger's would.
func bodies(seed uint64) (incumbent, challenger [][]byte, err error) {
	all := catalogue()
	rng := rand.New(rand.NewPCG(seed, seed^0x9e3779b97f4a7c15))
	for range variants {
		perm := rng.Perm(len(all))
		a := pick(all, perm[:listLen])
		shared := 6 + rng.IntN(9)
		b := pick(all, append(append([]int(nil), perm[:shared]...), perm[listLen:2*listLen-shared]...))
		rng.Shuffle(len(b), func(i, j int) { b[i], b[j] = b[j], b[i] })
		ja, err := encode("incumbent", a)
		if err != nil {
			return nil, nil, err
		}
		jb, err := encode("challenger", b)
		if err != nil {
			return nil, nil, err
		}
		incumbent, challenger = append(incumbent, ja), append(challenger, jb)
	}
	return incumbent, challenger, nil
}

// pick copies the items at idx out of all, in that order.
func pick(all []item, idx []int) []item {
	out := make([]item, len(idx))
	for i, k := range idx {
		out[i] = all[k]
	}
	return out
}

// encode gives each item its model score by rank and marshals the answer.
func encode(model string, items []item) ([]byte, error) {
	for i := range items {
		items[i].Score = float64(1000-37*i) / 1000
	}
	b, err := json.Marshal(answer{Model: model, Items: items})
	if err != nil {
		return nil, fmt.Errorf("bench: encode %s answer: %w", model, err)
	}
	return b, nil
}
