package sampler

import (
	"fmt"
	"math/rand/v2"

	"github.com/lagstar/lagstar/catalog"
	"github.com/lagstar/lagstar/priors"
)

// movingAverageTerm is the moving-average part of an ARMA(1,1) within
// part (movingavg.go): State.M, one coefficient per outcome, equal over
// time (occasions 3..T) unless paths are free over time (one per outcome
// and occasion from the third on). Coefficients are on the innovations'
// own scale, so the same on the outcomes' scales. Prior: N(0, sd^2) with
// the paths' sd (priors.Set.PathSD), truncated to the invertible region
// (-1, 1).
type movingAverageTerm struct{}

func (movingAverageTerm) Name() string { return "moving averages" }

func (movingAverageTerm) Active(l *Layout) bool { return l.MA }

func (movingAverageTerm) Params(l *Layout) []Param {
	var ps []Param
	names := l.outcomeNames()
	for _, occ := range maOccasions(l) {
		suffix := ""
		var o *int
		if l.PathsFree {
			o = l.occasion(occ[0])
			suffix = fmt.Sprintf(",t=%d", *o)
		}
		for j := 0; j < l.J; j++ {
			ps = append(ps, Param{Name: fmt.Sprintf("moving_average[%s%s]", names[j], suffix), Kind: "moving_average", Outcome: names[j], Occasion: o})
		}
	}
	return ps
}

func (movingAverageTerm) Extract(s *State, dst []float64) []float64 {
	J := s.L.J
	for _, occ := range maOccasions(s.L) {
		dst = append(dst, s.M[occ[0]*J:(occ[0]+1)*J]...)
	}
	return dst
}

func (movingAverageTerm) Inject(s *State, v []float64) []float64 {
	J := s.L.J
	for _, occ := range maOccasions(s.L) {
		for _, t := range occ {
			copy(s.M[t*J:(t+1)*J], v[:J])
		}
		v = v[J:]
	}
	return v
}

// set draws each coefficient with draw and writes it to its occasions.
func setMovingAverages(s *State, draw func() float64) {
	J := s.L.J
	for _, occ := range maOccasions(s.L) {
		for j := 0; j < J; j++ {
			v := draw()
			for _, t := range occ {
				s.M[t*J+j] = v
			}
		}
	}
}

// Start: uniform on (-0.1, 0.1).
func (movingAverageTerm) Start(s *State, rng *rand.Rand) {
	if s.L.maFixed {
		return
	}
	setMovingAverages(s, func() float64 { return 0.2 * (rng.Float64() - 0.5) })
}

// Prior: N(0, PathSD^2) truncated to (-1, 1), by rejection.
func (movingAverageTerm) Prior(s *State, pr priors.Set, rng *rand.Rand) {
	setMovingAverages(s, func() float64 {
		for {
			if v := pr.PathSD * rng.NormFloat64(); v > -1 && v < 1 {
				return v
			}
		}
	})
}

func (movingAverageTerm) Blocks(l *Layout, _ Options) []Placed {
	return []Placed{{slotPaths, NewMAPathBlock(l)}}
}

func init() {
	catalog.Register(catalog.Kind{Name: "moving_average", Section: catalog.Within, Tabled: true, Manuscript: "Within persons",
		Label: func(n catalog.Names) string { return n.Outcome + ", moving average" + n.At() }})
}
