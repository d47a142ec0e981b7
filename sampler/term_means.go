package sampler

import (
	"fmt"
	"github.com/lagstar/lagstar/catalog"
	"math/rand/v2"

	"github.com/lagstar/lagstar/priors"
)

// meanTerm is the occasion means: the free mean parameters State.Mean,
// placed on the occasions by Layout.MeanIdx (a categorical outcome's mean
// is 0 at its anchor occasion), and State.Nu, the T x J means they give
// (SyncNu).
type meanTerm struct{}

func (meanTerm) Name() string { return "occasion means" }

func (meanTerm) Active(l *Layout) bool { return l.NMean > 0 }

// eachMean calls fn for every free mean parameter in MeanIdx order with
// the first occasion t and outcome j it applies to.
func eachMean(l *Layout, fn func(idx, t, j int)) {
	seen := make([]bool, l.NMean)
	for t := 0; t < l.T; t++ {
		for j := 0; j < l.J; j++ {
			idx := l.MeanIdx[t*l.J+j]
			if idx < 0 || seen[idx] {
				continue
			}
			seen[idx] = true
			fn(idx, t, j)
		}
	}
}

func (meanTerm) Params(l *Layout) []Param {
	var ps []Param
	names := l.outcomeNames()
	eachMean(l, func(_, t, j int) {
		p := Param{Kind: "mean", Outcome: names[j]}
		if l.MeansFree {
			p.Occasion = l.occasion(t)
			p.Name = fmt.Sprintf("mean[%s,t=%d]", names[j], *p.Occasion)
		} else {
			p.Name = fmt.Sprintf("mean[%s]", names[j])
		}
		ps = append(ps, p)
	})
	return ps
}

func (meanTerm) Extract(s *State, dst []float64) []float64 {
	l := s.L
	eachMean(l, func(idx, _, j int) { dst = append(dst, l.Center[j]+l.Scale[j]*s.Mean[idx]) })
	return dst
}

func (meanTerm) Inject(s *State, v []float64) []float64 {
	l := s.L
	eachMean(l, func(idx, _, j int) {
		s.Mean[idx] = (v[0] - l.Center[j]) / l.Scale[j]
		v = v[1:]
	})
	s.SyncNu()
	return v
}

func (meanTerm) Start(s *State, rng *rand.Rand) {
	for i := range s.Mean {
		s.Mean[i] = 0.2 * (rng.Float64() - 0.5)
	}
	s.SyncNu()
}

// Prior draws every free mean from its normal prior (priors.Set.MeanSD).
func (meanTerm) Prior(s *State, pr priors.Set, rng *rand.Rand) {
	for i := range s.Mean {
		s.Mean[i] = pr.MeanSD * rng.NormFloat64()
	}
	s.SyncNu()
}

func (meanTerm) Blocks(l *Layout, _ Options) []Placed {
	return []Placed{{slotMeans, NewMeanBlock(l)}}
}

func init() {
	catalog.Register(catalog.Kind{Name: "mean", Section: catalog.Measurement, Tabled: true})
}
