package simulate

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
)

// MaxGrade is the highest relevance grade; grades run from 0 (not
// relevant) to MaxGrade.
const MaxGrade = 4

// ClickModel simulates one user's clicks on a ranked list.
type ClickModel interface {
	// Clicks appends to dst[:0] the 0-based positions the user clicks on
	// a list whose items have the given grades, in the order clicked.
	Clicks(dst []int, grades []int, r *rand.Rand) []int
}

// Cascade is a cascade user (Craswell, Zoeter, Taylor & Ramsey, WSDM 2008)
// with graded click and stop probabilities, as in the interleaving
// simulations of Hofmann, Whiteson & de Rijke (TOIS 2013) and Schuth et al.
// (CIKM 2014): the user reads the list top down, clicks an item of grade g
// with probability Click[g], and after a click stops reading with
// probability Stop[g].
type Cascade struct {
	Click, Stop [MaxGrade + 1]float64
}

// Clicks implements ClickModel.
func (c Cascade) Clicks(dst []int, grades []int, r *rand.Rand) []int {
	dst = dst[:0]
	for pos, g := range grades {
		g = clampGrade(g)
		if r.Float64() < c.Click[g] {
			dst = append(dst, pos)
			if r.Float64() < c.Stop[g] {
				break
			}
		}
	}
	return dst
}

// Position is the position-based model (Chuklin, Markov & de Rijke, Click
// Models for Web Search, 2015, section 3.3): the user examines position r
// (1-based) with probability (1/r)^Eta, independently of the other
// positions, and clicks an examined item of grade g with probability
// Attract[g].
type Position struct {
	Eta     float64
	Attract [MaxGrade + 1]float64
}

// Clicks implements ClickModel.
func (p Position) Clicks(dst []int, grades []int, r *rand.Rand) []int {
	dst = dst[:0]
	for pos, g := range grades {
		exam := math.Pow(1/float64(pos+1), p.Eta)
		if r.Float64() < exam && r.Float64() < p.Attract[clampGrade(g)] {
			dst = append(dst, pos)
		}
	}
	return dst
}

// clampGrade keeps a grade within 0..MaxGrade.
func clampGrade(g int) int { return max(0, min(g, MaxGrade)) }

// ClickModelNames lists the names NewClickModel accepts.
func ClickModelNames() []string {
	return []string{"perfect", "navigational", "informational", "random", "position"}
}

// NewClickModel returns a named click model. The cascade users' click and
// stop probabilities per grade 0-4 are those of the perfect, navigational
// and informational users of Schuth et al. (CIKM 2014), as recalled from
// memory of that paper (Hofmann et al., TOIS 2013, use the same users on
// fewer grades); random clicks every item with probability 0.5 and never
// stops (Hofmann et al.'s random user, recalled from memory). position is
// Position with exponent eta (0 means 1) and attractiveness per grade
// (2^g - 1)/2^4, the grade-to-probability map of expected reciprocal rank
// (Chapelle, Metzler, Zhang & Grinspan, CIKM 2009).
func NewClickModel(name string, eta float64) (ClickModel, error) {
	switch name {
	case "perfect":
		return Cascade{Click: [5]float64{0, 0.2, 0.4, 0.8, 1}}, nil
	case "navigational":
		return Cascade{
			Click: [5]float64{0.05, 0.3, 0.5, 0.7, 0.95},
			Stop:  [5]float64{0.2, 0.3, 0.5, 0.7, 0.9},
		}, nil
	case "informational":
		return Cascade{
			Click: [5]float64{0.4, 0.6, 0.7, 0.8, 0.9},
			Stop:  [5]float64{0.1, 0.2, 0.3, 0.4, 0.5},
		}, nil
	case "random":
		return Cascade{Click: [5]float64{0.5, 0.5, 0.5, 0.5, 0.5}}, nil
	case "position":
		if eta == 0 {
			eta = 1
		}
		if !(eta > 0) || math.IsInf(eta, 0) {
			return nil, fmt.Errorf("simulate: click model position: eta %v: %w", eta, ErrConfig)
		}
		var p Position
		p.Eta = eta
		for g := range p.Attract {
			p.Attract[g] = (math.Exp2(float64(g)) - 1) / math.Exp2(MaxGrade)
		}
		return p, nil
	}
	return nil, fmt.Errorf("simulate: %w %q (known: %s)", ErrUnknownClickModel, name,
		strings.Join(ClickModelNames(), ", "))
}

// oneClick clicks exactly one position, uniformly at random: the "one
// uniformly random click" under which balanced interleaving's bias is
// usually shown (for A = (a,b,c) and B = (b,c,a) it prefers B in two of
// three cases).
type oneClick struct{}

// Clicks implements ClickModel.
func (oneClick) Clicks(dst []int, grades []int, r *rand.Rand) []int {
	dst = dst[:0]
	if len(grades) > 0 {
		dst = append(dst, r.IntN(len(grades)))
	}
	return dst
}
