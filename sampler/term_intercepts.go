package sampler

import (
	"fmt"
	"github.com/lagstar/lagstar/catalog"
	"math"
	"math/rand/v2"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/priors"
)

// interceptTerm is the random intercepts (State.B, N x J, latent) and
// their covariance State.Psi, reported as variances (outcomes' own
// scales) and correlations; derived: the latent intraclass correlations.
type interceptTerm struct{}

func (interceptTerm) Name() string { return "random intercepts" }

// Active: under growth the growth term (term_growth.go) owns the
// intercepts with the slopes.
func (interceptTerm) Active(l *Layout) bool { return l.RI && !l.Growth }

func (interceptTerm) Params(l *Layout) []Param {
	var ps []Param
	names := l.outcomeNames()
	for j := 0; j < l.J; j++ {
		ps = append(ps, Param{Name: fmt.Sprintf("ri_variance[%s]", names[j]), Kind: "ri_variance", Outcome: names[j]})
	}
	for a := 0; a < l.J; a++ {
		for b := a + 1; b < l.J; b++ {
			ps = append(ps, Param{Name: fmt.Sprintf("ri_correlation[%s,%s]", names[a], names[b]), Kind: "ri_correlation", Pair: []string{names[a], names[b]}})
		}
	}
	return ps
}

func (interceptTerm) Extract(s *State, dst []float64) []float64 {
	l := s.L
	J := l.J
	for j := 0; j < J; j++ {
		dst = append(dst, s.Psi[j*J+j]*l.Scale[j]*l.Scale[j])
	}
	for a := 0; a < J; a++ {
		for b := a + 1; b < J; b++ {
			dst = append(dst, s.Psi[a*J+b]/math.Sqrt(s.Psi[a*J+a]*s.Psi[b*J+b]))
		}
	}
	return dst
}

func (interceptTerm) Inject(s *State, v []float64) []float64 {
	l := s.L
	J := l.J
	for j := 0; j < J; j++ {
		s.Psi[j*J+j] = v[0] / (l.Scale[j] * l.Scale[j])
		v = v[1:]
	}
	for a := 0; a < J; a++ {
		for b := a + 1; b < J; b++ {
			c := v[0] * math.Sqrt(s.Psi[a*J+a]*s.Psi[b*J+b])
			v = v[1:]
			s.Psi[a*J+b], s.Psi[b*J+a] = c, c
		}
	}
	return v
}

// Start: variances uniform on (0.3, 0.7), correlations 0; the intercepts
// start at 0 and are drawn by the first sweep.
func (interceptTerm) Start(s *State, rng *rand.Rand) {
	J := s.L.J
	for j := 0; j < J; j++ {
		s.Psi[j*J+j] = 0.3 + 0.4*rng.Float64()
	}
}

// Prior draws Psi from its inverse-Wishart prior (J + RIDfExtra degrees
// of freedom, scale RIScale I).
func (interceptTerm) Prior(s *State, pr priors.Set, rng *rand.Rand) {
	J := s.L.J
	scale := make([]float64, J*J)
	for j := 0; j < J; j++ {
		scale[j*J+j] = pr.RIScale
	}
	priors.InvWishart(s.Psi, rng, float64(J)+pr.RIDfExtra, scale, J, make([]float64, priors.InvWishartWork(J)))
}

// Blocks: the collapsed move (one outcome, paths equal over time) right
// before the intercepts, which it leaves to be drawn from their full
// conditional; the intercepts; the location move; the covariance (centred);
// with several outcomes the non-centred draw of its scales (interweaving).
func (interceptTerm) Blocks(l *Layout, opt Options) []Placed {
	plain := opt.ThresholdUpdate == model.ThresholdAlbertChib
	if l.Dyn {
		// Lagged latent response: the intercepts' design is the first
		// occasion's loadings and then the identity (InterceptBlock); the
		// collapsed, location and interweaving moves assume the residual
		// form and are left out.
		return []Placed{{slotIntercepts, NewInterceptBlock(l)}, {slotPsi, NewPsiBlock(l)}}
	}
	if l.MA {
		// The collapsed and interweaving moves rely on the
		// autoregressive structure; the Gibbs blocks are exact under
		// ARMA(1,1) as well (movingavg.go).
		ps := []Placed{{slotIntercepts, NewInterceptBlock(l)}, {slotPsi, NewPsiBlock(l)}}
		if !plain {
			// The location move leaves w unchanged, so it is exact
			// whatever the within structure.
			ps = append(ps, Placed{slotLocation, NewLocationBlock(l)})
		}
		return ps
	}
	var ps []Placed
	if !plain && l.J == 1 && l.HasPaths() && !l.PathsFree {
		// One outcome only: measured (docs/performance.md), it raised the
		// slowest parameter's ESS per second by 21% on problem D and 38%
		// on the Ohio panel, but lowered it by about 25% on the
		// two-outcome problem P, whose slowest direction lies elsewhere.
		ps = append(ps, Placed{slotCollapsed, NewCollapsedBlock(l)})
	}
	ps = append(ps, Placed{slotIntercepts, NewInterceptBlock(l)})
	if !plain {
		ps = append(ps, Placed{slotLocation, NewLocationBlock(l)})
	}
	ps = append(ps, Placed{slotPsi, NewPsiBlock(l)})
	if !plain && l.J > 1 {
		// Several outcomes only: measured (docs/performance.md), it raised
		// the slowest parameter's ESS per second by about half on a
		// two-binary panel of 1,200 x 5 and by a sixth on problem P, where
		// the intercept variances were slowest; with one outcome the
		// collapsed move already covers that direction and it did not help.
		ps = append(ps, Placed{slotInterweave, NewInterweaveBlock(l)})
	}
	return ps
}

// DerivedParams: the latent intraclass correlation of each outcome (one
// per outcome, or per occasion when paths are free over time).
func (interceptTerm) DerivedParams(l *Layout) []Param {
	var ps []Param
	names := l.outcomeNames()
	for _, t := range l.iccOccasions() {
		suffix := ""
		var o *int
		if t >= 0 {
			o = l.occasion(t)
			suffix = fmt.Sprintf(",t=%d", *o)
		}
		for j := 0; j < l.J; j++ {
			ps = append(ps, Param{Name: fmt.Sprintf("icc[%s%s]", names[j], suffix), Kind: "icc", Outcome: names[j], Occasion: o})
		}
	}
	return ps
}

// ExtractDerived: ICC_j = psi_jj / (psi_jj + V[j,j]).
func (interceptTerm) ExtractDerived(s *State, dw *DerivedWork, dst []float64) []float64 {
	l := s.L
	J := l.J
	JJ := J * J
	for _, t := range l.iccOccasions() {
		cur := dw.refV
		if t >= 0 {
			cur = dw.v[t*JJ : (t+1)*JJ]
		}
		for j := 0; j < J; j++ {
			p := s.Psi[j*J+j]
			if l.Dyn {
				// The between variance of the latent response at t:
				// (S_t Psi S_t')[j, j] (term_dynamic.go).
				p = s.BetweenCov(t, j, t, j)
			}
			dst = append(dst, p/(p+cur[j*J+j]))
		}
	}
	return dst
}

func init() {
	catalog.Register(
		catalog.Kind{Name: "ri_variance", Section: catalog.Between, Tabled: true, Manuscript: "Between persons",
			Label: func(n catalog.Names) string { return n.Outcome + ", random-intercept variance" }},
		catalog.Kind{Name: "ri_correlation", Section: catalog.Between, Tabled: true, Manuscript: "Between persons",
			Label: func(n catalog.Names) string { return n.PairLabel() + ", random-intercept correlation" }},
		catalog.Kind{Name: "icc", Section: catalog.Derived, Tabled: true, Manuscript: "Intraclass correlations (latent)",
			Label: func(n catalog.Names) string { return n.Outcome + ", ICC" + n.At() }},
	)
}
