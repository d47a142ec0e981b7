package sampler

import (
	"fmt"
	"github.com/lagstar/lagstar/catalog"
	"math"
	"math/rand/v2"
	"slices"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/priors"
	"gonum.org/v1/gonum/stat/distuv"
)

// thresholdTerm is the thresholds of the categorical outcomes
// (State.Tau[j], K_j - 1 increasing cut points on the latent scale) and,
// as derived quantities, the model-implied category probabilities per
// occasion.
type thresholdTerm struct{}

func (thresholdTerm) Name() string { return "thresholds" }

func (thresholdTerm) Active(l *Layout) bool { return slices.Contains(l.Cat, true) }

func (thresholdTerm) Params(l *Layout) []Param {
	var ps []Param
	names := l.outcomeNames()
	for j := 0; j < l.J; j++ {
		for k := 1; k < l.K[j] && l.Cat[j]; k++ {
			ps = append(ps, Param{Name: fmt.Sprintf("threshold[%s,%d]", names[j], k), Kind: "threshold", Outcome: names[j], Index: k})
		}
	}
	return ps
}

func (thresholdTerm) Extract(s *State, dst []float64) []float64 {
	for j := 0; j < s.L.J; j++ {
		if s.L.Cat[j] {
			dst = append(dst, s.Tau[j]...)
		}
	}
	return dst
}

func (thresholdTerm) Inject(s *State, v []float64) []float64 {
	for j := 0; j < s.L.J; j++ {
		if s.L.Cat[j] {
			v = v[copy(s.Tau[j], v):]
		}
	}
	return v
}

// Start sets the thresholds at the normal quantiles of the cumulative
// marginal proportions, jittered, at least 0.05 apart.
func (thresholdTerm) Start(s *State, rng *rand.Rand) {
	l := s.L
	J := l.J
	for j := 0; j < J; j++ {
		if !l.Cat[j] {
			continue
		}
		K := l.K[j]
		count := make([]float64, K)
		n := 0.0
		for c := j; c < len(s.Y); c += J {
			if v := s.Y[c]; !math.IsNaN(v) {
				count[int(v)]++
				n++
			}
		}
		tau := make([]float64, K-1)
		cum := 0.0
		for k := 0; k < K-1; k++ {
			cum += count[k]
			p := (cum + 0.5) / (n + float64(K)*0.5)
			tau[k] = normalQuantile(p) + 0.2*(rng.Float64()-0.5)
			if k > 0 && tau[k] <= tau[k-1]+0.05 {
				tau[k] = tau[k-1] + 0.05
			}
		}
		s.Tau[j] = tau
	}
}

// Prior draws the thresholds as sorted normal draws (the order statistics
// of the flat-order prior, priors.Set.ThresholdSD).
func (thresholdTerm) Prior(s *State, pr priors.Set, rng *rand.Rand) {
	for j := 0; j < s.L.J; j++ {
		if s.L.Cat[j] {
			for k := range s.Tau[j] {
				s.Tau[j][k] = pr.ThresholdSD * rng.NormFloat64()
			}
			slices.Sort(s.Tau[j])
		}
	}
}

// Blocks: the scale move right after the latent block, whose pass leaves
// the within-path sums it needs (State.WQuad); the threshold draw; the
// level move when means are free over time. With threshold_update:
// albert-chib only the plain threshold draw.
func (thresholdTerm) Blocks(l *Layout, opt Options) []Placed {
	update := opt.ThresholdUpdate
	plain := update == model.ThresholdAlbertChib
	if l.Dyn {
		// Lagged latent response: the scale move is exact with own lags
		// only (ScaleBlock); the level move assumes the residual form.
		ps := []Placed{{slotThresholds, NewThresholdBlock(l, update)}}
		if !plain && l.Lags == model.LagsOwn {
			ps = append(ps, Placed{slotScale, NewScaleBlock(l)})
		}
		return ps
	}
	if l.MA {
		// The scale move reads the within paths' quadratic forms, which
		// the innovation recursion gives under ARMA(1,1) too
		// (accumulateWQuadMA); the level move uses the banded
		// autoregressive structure and is left out.
		ps := []Placed{{slotThresholds, NewThresholdBlock(l, update)}}
		if !plain {
			ps = append(ps, Placed{slotScale, NewScaleBlock(l)})
		}
		return ps
	}
	var ps []Placed
	if !plain {
		ps = append(ps, Placed{slotScale, NewScaleBlock(l)})
	}
	ps = append(ps, Placed{slotThresholds, NewThresholdBlock(l, update)})
	if lb := NewLevelBlock(l); !plain && lb.needed() {
		ps = append(ps, Placed{slotLevel, lb})
	}
	return ps
}

// DerivedParams: the category probabilities of each categorical outcome
// at each occasion.
func (thresholdTerm) DerivedParams(l *Layout) []Param {
	var ps []Param
	names := l.outcomeNames()
	for j := 0; j < l.J; j++ {
		if !l.Cat[j] {
			continue
		}
		for t := 0; t < l.T; t++ {
			for k := 0; k < l.K[j]; k++ {
				o := l.occasion(t)
				ps = append(ps, Param{Name: fmt.Sprintf("category_probability[%s,%s,t=%d]", names[j], l.Panel.Outcomes[j].Codes[k], *o),
					Kind: "category_probability", Outcome: names[j], Index: k + 1, Occasion: o})
			}
		}
	}
	return ps
}

// ExtractDerived: the model-implied marginal probabilities
// Phi((tau_k - nu_jt)/sqrt(psi_jj + V_t[j,j])) differences (under growth
// the mean and between variance of the growth line at t).
func (thresholdTerm) ExtractDerived(s *State, dw *DerivedWork, dst []float64) []float64 {
	l := s.L
	J := l.J
	JJ := J * J
	norm := distuv.UnitNormal
	for j := 0; j < J; j++ {
		if !l.Cat[j] {
			continue
		}
		for t := 0; t < l.T; t++ {
			sd := math.Sqrt(s.BetweenCov(t, j, t, j) + dw.v[t*JJ+j*J+j])
			mu := s.CellMean(t, j)
			prev := 0.0
			for k := 0; k < l.K[j]; k++ {
				c := 1.0
				if k < l.K[j]-1 {
					c = norm.CDF((s.Tau[j][k] - mu) / sd)
				}
				dst = append(dst, c-prev)
				prev = c
			}
		}
	}
	return dst
}

func init() {
	catalog.Register(
		catalog.Kind{Name: "threshold", Section: catalog.Measurement, Tabled: true, Manuscript: "Thresholds",
			Label: func(n catalog.Names) string { return fmt.Sprintf("%s, threshold %d", n.Outcome, n.Index) }},
		catalog.Kind{Name: "category_probability", Section: catalog.Derived},
	)
}
