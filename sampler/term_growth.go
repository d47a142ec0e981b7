package sampler

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"github.com/lagstar/lagstar/catalog"
	"github.com/lagstar/lagstar/priors"
)

// growthTerm is growth with autocorrelated residuals: person i's between
// part of outcome j at grid occasion t is b_ij + s_t g_ij (a random
// intercept and a random slope over the time scores s_t, Layout.Time), with
// f_i = (b_i, g_i) ~ N(mu, Psi), Psi 2J x 2J (intercepts first), and the
// within part w keeps its carry-over. The means mu are the growth line:
// mu_j (the mean intercept, fixed at 0 for a categorical outcome, whose
// thresholds carry its level) and mu_J+j (the mean slope). The slopes and
// means live in the term's own storage (State.G, State.GMean); Psi is
// State.Psi.
//
// Priors: Psi ~ inverse-Wishart(2J + RIDfExtra, S0) with S0 =
// RIScale diag(1, ..., 1, 1/d^2, ..., 1/d^2), d the span of the time
// scores, so that a person's change over the whole span has the prior of
// an intercept; a free mean intercept ~ N(0, MeanSD^2), a mean slope ~
// N(0, (MeanSD/d)^2).
type growthTerm struct{}

func (growthTerm) Name() string { return "growth factors" }

func (growthTerm) Active(l *Layout) bool { return l.Growth }

// OwnSize: the 2J means, then the N x J slopes.
func (growthTerm) OwnSize(l *Layout) int { return 2*l.J + l.N*l.J }

// growthSpan is the span d of the time scores.
func growthSpan(l *Layout) float64 { return slices.Max(l.Time) - slices.Min(l.Time) }

// growthMeanFree reports whether mean k (0..2J-1) is a parameter.
func growthMeanFree(l *Layout, k int) bool { return k >= l.J || !l.Cat[k] }

func (growthTerm) Params(l *Layout) []Param {
	var ps []Param
	names := l.outcomeNames()
	J := l.J
	for j := 0; j < J; j++ {
		if growthMeanFree(l, j) {
			ps = append(ps, Param{Name: fmt.Sprintf("intercept_mean[%s]", names[j]), Kind: "intercept_mean", Outcome: names[j]})
		}
	}
	for j := 0; j < J; j++ {
		ps = append(ps, Param{Name: fmt.Sprintf("slope_mean[%s]", names[j]), Kind: "slope_mean", Outcome: names[j]})
	}
	for j := 0; j < J; j++ {
		ps = append(ps, Param{Name: fmt.Sprintf("ri_variance[%s]", names[j]), Kind: "ri_variance", Outcome: names[j]})
	}
	for j := 0; j < J; j++ {
		ps = append(ps, Param{Name: fmt.Sprintf("slope_variance[%s]", names[j]), Kind: "slope_variance", Outcome: names[j]})
	}
	for a := 0; a < J; a++ {
		for b := a + 1; b < J; b++ {
			ps = append(ps, Param{Name: fmt.Sprintf("ri_correlation[%s,%s]", names[a], names[b]), Kind: "ri_correlation", Pair: []string{names[a], names[b]}})
		}
	}
	for a := 0; a < J; a++ {
		for b := a + 1; b < J; b++ {
			ps = append(ps, Param{Name: fmt.Sprintf("slope_correlation[%s,%s]", names[a], names[b]), Kind: "slope_correlation", Pair: []string{names[a], names[b]}})
		}
	}
	for a := 0; a < J; a++ {
		for b := 0; b < J; b++ {
			p := Param{Name: fmt.Sprintf("intercept_slope_correlation[%s,%s]", names[a], names[b]), Kind: "intercept_slope_correlation", Pair: []string{names[a], names[b]}}
			if a == b {
				p.Name, p.Outcome, p.Pair = fmt.Sprintf("intercept_slope_correlation[%s]", names[a]), names[a], nil
			}
			ps = append(ps, p)
		}
	}
	return ps
}

// eachGrowthCov calls fn with the (row, column) of Psi of every reported
// variance and correlation, in Params order, and whether it is a variance.
func eachGrowthCov(J int, fn func(r, c int, variance bool)) {
	for k := 0; k < 2*J; k++ {
		fn(k, k, true)
	}
	for _, off := range []int{0, J} {
		for a := 0; a < J; a++ {
			for b := a + 1; b < J; b++ {
				fn(off+a, off+b, false)
			}
		}
	}
	for a := 0; a < J; a++ {
		for b := 0; b < J; b++ {
			fn(a, J+b, false)
		}
	}
}

func (growthTerm) Extract(s *State, dst []float64) []float64 {
	l := s.L
	J, n := l.J, 2*l.J
	for j := 0; j < J; j++ {
		if growthMeanFree(l, j) {
			dst = append(dst, l.Center[j]+l.Scale[j]*s.GMean[j])
		}
	}
	for j := 0; j < J; j++ {
		dst = append(dst, l.Scale[j]*s.GMean[J+j])
	}
	eachGrowthCov(J, func(r, c int, variance bool) {
		if variance {
			dst = append(dst, s.Psi[r*n+r]*l.Scale[r%J]*l.Scale[r%J])
			return
		}
		dst = append(dst, s.Psi[r*n+c]/math.Sqrt(s.Psi[r*n+r]*s.Psi[c*n+c]))
	})
	return dst
}

func (growthTerm) Inject(s *State, v []float64) []float64 {
	l := s.L
	J, n := l.J, 2*l.J
	for j := 0; j < J; j++ {
		s.GMean[j] = 0
		if growthMeanFree(l, j) {
			s.GMean[j] = (v[0] - l.Center[j]) / l.Scale[j]
			v = v[1:]
		}
	}
	for j := 0; j < J; j++ {
		s.GMean[J+j] = v[0] / l.Scale[j]
		v = v[1:]
	}
	eachGrowthCov(J, func(r, c int, variance bool) {
		if variance {
			s.Psi[r*n+r] = v[0] / (l.Scale[r%J] * l.Scale[r%J])
		} else {
			x := v[0] * math.Sqrt(s.Psi[r*n+r]*s.Psi[c*n+c])
			s.Psi[r*n+c], s.Psi[c*n+r] = x, x
		}
		v = v[1:]
	})
	return v
}

// Start: intercept variances uniform on (0.3, 0.7), slope variances the
// same over the squared span of the time scores, correlations 0, free
// means uniform on (-0.1, 0.1) (slopes: over the span); the factors
// start at their means and are drawn by the first sweep.
func (growthTerm) Start(s *State, rng *rand.Rand) {
	l := s.L
	J, n := l.J, 2*l.J
	d := growthSpan(l)
	for k := 0; k < n; k++ {
		v := 0.3 + 0.4*rng.Float64()
		if k >= J {
			v /= d * d
		}
		s.Psi[k*n+k] = v
	}
	for k := 0; k < n; k++ {
		m := 0.2 * (rng.Float64() - 0.5)
		if k >= J {
			m /= d
		}
		if growthMeanFree(l, k) {
			s.GMean[k] = m
		}
	}
	for i := 0; i < l.N; i++ {
		for j := 0; j < J; j++ {
			s.B[i*J+j], s.G[i*J+j] = s.GMean[j], s.GMean[J+j]
		}
	}
}

// growthPriorScale writes S0 of the inverse-Wishart prior into dst.
func growthPriorScale(dst []float64, l *Layout, pr priors.Set) {
	J, n := l.J, 2*l.J
	d := growthSpan(l)
	clear(dst)
	for k := 0; k < n; k++ {
		dst[k*n+k] = pr.RIScale
		if k >= J {
			dst[k*n+k] /= d * d
		}
	}
}

// growthMeanSD is the prior sd of mean k.
func growthMeanSD(l *Layout, pr priors.Set, k int) float64 {
	if k >= l.J {
		return pr.MeanSD / growthSpan(l)
	}
	return pr.MeanSD
}

// GrowthPriors describes the growth priors for the summary.
func GrowthPriors(l *Layout) []string {
	d := growthSpan(l)
	pr := l.Priors
	return []string{
		fmt.Sprintf("intercepts and slopes: covariance inverse-Wishart(%g, diag(%g for intercepts, %g/%g^2 for slopes)) on the latent scale (a person's change over the span %g of the time scores has the prior of an intercept)", float64(2*l.J)+pr.RIDfExtra, pr.RIScale, pr.RIScale, d, d),
		fmt.Sprintf("growth means: mean intercepts (continuous outcomes) normal(0, %g^2), mean slopes normal(0, (%g/%g)^2), on the latent or standardized scale", pr.MeanSD, pr.MeanSD, d),
	}
}

// Prior draws Psi from its inverse-Wishart prior and the free means from
// their normal priors; the factors are drawn with the data (the
// calibration draws them in the generator).
func (growthTerm) Prior(s *State, pr priors.Set, rng *rand.Rand) {
	l := s.L
	n := 2 * l.J
	scale := make([]float64, n*n)
	growthPriorScale(scale, l, pr)
	priors.InvWishart(s.Psi, rng, float64(n)+pr.RIDfExtra, scale, n, make([]float64, priors.InvWishartWork(n)))
	for k := 0; k < n; k++ {
		if growthMeanFree(l, k) {
			s.GMean[k] = growthMeanSD(l, pr, k) * rng.NormFloat64()
		}
	}
}

// Blocks: the factors and their means drawn jointly (growth.go), their
// covariance (centred), then its scales non-centred (interweaving). A
// collapsed move of the paths and Psi with the factors integrated out, as
// for random intercepts, was tried on a binary panel of 800 x 6 and did
// not raise the effective sample sizes: the slow direction there runs
// through the latent responses.
func (growthTerm) Blocks(l *Layout, _ Options) []Placed {
	gb := NewGrowthBlock(l)
	return []Placed{{slotIntercepts, gb}, {slotPsi, NewGrowthCovBlock(l)}, {slotInterweave, NewGrowthInterweaveBlock(l, gb)}}
}

// DerivedParams: the latent intraclass correlation of each outcome at
// each occasion (the between variance changes along the growth line).
func (growthTerm) DerivedParams(l *Layout) []Param {
	var ps []Param
	names := l.outcomeNames()
	for _, t := range l.iccOccasions() {
		o := l.occasion(t)
		for j := 0; j < l.J; j++ {
			ps = append(ps, Param{Name: fmt.Sprintf("icc[%s,t=%d]", names[j], *o), Kind: "icc", Outcome: names[j], Occasion: o})
		}
	}
	return ps
}

// ExtractDerived: ICC_jt = z_t' Psi_j z_t / (z_t' Psi_j z_t + V_t[j,j]).
func (growthTerm) ExtractDerived(s *State, dw *DerivedWork, dst []float64) []float64 {
	J := s.L.J
	JJ := J * J
	for _, t := range s.L.iccOccasions() {
		for j := 0; j < J; j++ {
			p := s.BetweenCov(t, j, t, j)
			dst = append(dst, p/(p+dw.v[t*JJ+j*J+j]))
		}
	}
	return dst
}

func init() {
	catalog.Register(
		catalog.Kind{Name: "intercept_mean", Section: catalog.Between, Tabled: true, Manuscript: "Between persons",
			Label: func(n catalog.Names) string { return n.Outcome + ", mean intercept (time score 0)" }},
		catalog.Kind{Name: "slope_mean", Section: catalog.Between, Tabled: true, Manuscript: "Between persons",
			Label: func(n catalog.Names) string { return n.Outcome + ", mean slope per time unit" }},
		catalog.Kind{Name: "slope_variance", Section: catalog.Between, Tabled: true, Manuscript: "Between persons",
			Label: func(n catalog.Names) string { return n.Outcome + ", random-slope variance" }},
		catalog.Kind{Name: "slope_correlation", Section: catalog.Between, Tabled: true, Manuscript: "Between persons",
			Label: func(n catalog.Names) string { return n.PairLabel() + ", random-slope correlation" }},
		catalog.Kind{Name: "intercept_slope_correlation", Section: catalog.Between, Tabled: true, Manuscript: "Between persons",
			Label: func(n catalog.Names) string {
				if n.Outcome != "" {
					return n.Outcome + ", intercept-slope correlation"
				}
				return n.PairLabel() + ", intercept of the first with slope of the second"
			}},
	)
}
