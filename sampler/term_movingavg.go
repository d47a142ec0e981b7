package sampler

import (
	"fmt"
	"math/rand/v2"

	"github.com/lagstar/lagstar/catalog"
	"github.com/lagstar/lagstar/internal/dense"
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

// setMovingAverages draws each coefficient with draw and writes it to its
// occasions.
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

// maxAutocorrLag is the largest lag of the derived within-person
// autocorrelations.
const maxAutocorrLag = 3

// DerivedParams: with paths equal over time, the model-implied
// autocorrelations of each outcome's latent within part at lags
// 1..3 (not geometric under ARMA(1,1), so worth reading).
func (movingAverageTerm) DerivedParams(l *Layout) []Param {
	if l.PathsFree {
		return nil
	}
	var ps []Param
	names := l.outcomeNames()
	for j := 0; j < l.J; j++ {
		for k := 1; k <= min(maxAutocorrLag, l.T-1); k++ {
			ps = append(ps, Param{Name: fmt.Sprintf("within_autocorrelation[%s,lag=%d]", names[j], k), Kind: "within_autocorrelation", Outcome: names[j], Index: k})
		}
	}
	return ps
}

// ExtractDerived: Gamma(0) is the stationary variance (DerivedWork.refV;
// the last occasion's when the carry-over is not stable), Gamma(1) =
// A Gamma(0) + M Sigma (Cov(w_{t-1}, zeta_{t-1}) = Sigma) and Gamma(k) =
// A Gamma(k-1); the autocorrelation at lag k is Gamma(k)[j,j] /
// Gamma(0)[j,j].
func (movingAverageTerm) ExtractDerived(s *State, dw *DerivedWork, dst []float64) []float64 {
	l := s.L
	if l.PathsFree {
		return dst
	}
	J := l.J
	JJ := J * J
	g0 := dw.refV
	a, m, sig := s.A[JJ:2*JJ], s.M[2*J:3*J], s.Sig[JJ:2*JJ]
	cur, next := dw.st[:JJ], dw.st[JJ:2*JJ]
	kmax := min(maxAutocorrLag, l.T-1)
	start := len(dst)
	dst = append(dst, make([]float64, J*kmax)...)
	dense.Mul(cur, a, g0, J, J, J)
	for r := 0; r < J; r++ {
		for c := 0; c < J; c++ {
			cur[r*J+c] += m[r] * sig[r*J+c]
		}
	}
	for k := 1; k <= kmax; k++ {
		if k > 1 {
			dense.Mul(next, a, cur, J, J, J)
			cur, next = next, cur
		}
		for j := 0; j < J; j++ {
			dst[start+j*kmax+k-1] = cur[j*J+j] / g0[j*J+j]
		}
	}
	return dst
}

func init() {
	catalog.Register(catalog.Kind{Name: "moving_average", Section: catalog.Within, Tabled: true, Manuscript: "Within persons",
		Label: func(n catalog.Names) string { return n.Outcome + ", moving average" + n.At() }},
		catalog.Kind{Name: "within_autocorrelation", Section: catalog.Derived, Tabled: true})
}
