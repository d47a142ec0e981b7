package sampler

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"github.com/lagstar/lagstar/catalog"
	"github.com/lagstar/lagstar/internal/bvn"
	"github.com/lagstar/lagstar/priors"
)

// transitionTerm reports, as derived quantities, the model-implied
// transition probabilities of each categorical outcome between occasions
// t-1 and t: the probability of staying in each category (p_stay), and for
// a binary outcome of moving from the lower to the upper category (p_onset:
// P(yes at t | no at t-1)). Each for a typical person (random intercept at
// its mean, 0) and averaged over persons (the population's transition
// shares: the intercept variance joins the within variances). Exact per
// draw: the latent responses (y*_t-1, y*_t) are bivariate normal with
// variances V_t-1 and V_t (plus psi for the average), covariance
// (A_t V_t-1)_jj (plus psi), and a stay probability is a bivariate normal
// rectangle over a marginal interval (internal/bvn). One set per outcome
// when paths and means are equal over time (at the stationary variance
// when the carry-over is stable), else one per occasion t >= 1.
type transitionTerm struct{}

func (transitionTerm) Name() string { return "transition probabilities" }

func (transitionTerm) Active(l *Layout) bool { return l.T > 1 && slices.Contains(l.Cat, true) }

func (transitionTerm) Params(*Layout) []Param                    { return nil }
func (transitionTerm) Extract(_ *State, dst []float64) []float64 { return dst }
func (transitionTerm) Inject(_ *State, v []float64) []float64    { return v }
func (transitionTerm) Start(*State, *rand.Rand)                  {}
func (transitionTerm) Prior(*State, priors.Set, *rand.Rand)      {}
func (transitionTerm) Blocks(*Layout, Options) []Placed          { return nil }

var transitionScopes = []string{"typical", "average"}

func (transitionTerm) DerivedParams(l *Layout) []Param {
	var ps []Param
	names := l.outcomeNames()
	for j := 0; j < l.J; j++ {
		if !l.Cat[j] {
			continue
		}
		codes := l.Panel.Outcomes[j].Codes
		for _, t := range l.transitionOccasions() {
			suffix := ""
			var o *int
			if t >= 0 {
				o = l.occasion(t)
				suffix = fmt.Sprintf(",t=%d", *o)
			}
			for _, scope := range transitionScopes {
				for k := 0; k < l.K[j]; k++ {
					if l.K[j] == 2 && k == 0 {
						continue // binary: staying in the lower category is 1 - p_onset
					}
					kind := "p_stay_" + scope
					ps = append(ps, Param{Name: fmt.Sprintf("%s[%s,%s%s]", kind, names[j], codes[k], suffix), Kind: kind, Outcome: names[j], Index: k + 1, Occasion: o})
				}
				if l.K[j] == 2 {
					kind := "p_onset_" + scope
					ps = append(ps, Param{Name: fmt.Sprintf("%s[%s%s]", kind, names[j], suffix), Kind: kind, Outcome: names[j], Occasion: o})
				}
			}
		}
	}
	return ps
}

func (transitionTerm) ExtractDerived(s *State, dw *DerivedWork, dst []float64) []float64 {
	l := s.L
	J := l.J
	JJ := J * J
	for j := 0; j < J; j++ {
		if !l.Cat[j] {
			continue
		}
		for _, t := range l.transitionOccasions() {
			var vPrev, vCur, cov, nuPrev, nuCur float64
			if t < 0 {
				ref, a := dw.refV, s.A[JJ:2*JJ]
				vPrev, vCur = ref[j*J+j], ref[j*J+j]
				for c := 0; c < J; c++ {
					cov += a[j*J+c] * ref[c*J+j]
				}
				if l.MA { // + M Sigma: Cov(zeta_{t-1}, w_{t-1}) = Sigma
					cov += s.M[2*J+j] * s.Sig[JJ+j*J+j]
				}
				nuPrev, nuCur = s.Nu[j], s.Nu[J+j]
			} else {
				prev, a := dw.v[(t-1)*JJ:t*JJ], s.A[t*JJ:(t+1)*JJ]
				vPrev, vCur = prev[j*J+j], dw.v[t*JJ+j*J+j]
				for c := 0; c < J; c++ {
					cov += a[j*J+c] * prev[c*J+j]
				}
				if l.MA {
					cov += s.M[t*J+j] * s.Sig[(t-1)*JJ+j*J+j]
				}
				nuPrev, nuCur = s.CellMean(t-1, j), s.CellMean(t, j)
			}
			for _, scope := range transitionScopes {
				v1, v2, c := vPrev, vCur, cov
				if scope == "average" && (l.Growth || l.Dyn) {
					// The between part changes over occasions (growth
					// line, or the lagged latent response's S_t).
					v1 += s.BetweenCov(t-1, j, t-1, j)
					v2 += s.BetweenCov(t, j, t, j)
					c += s.BetweenCov(t-1, j, t, j)
				} else if scope == "average" && l.RI {
					p := s.Psi[j*J+j]
					v1, v2, c = v1+p, v2+p, c+p
				}
				s1, s2 := math.Sqrt(v1), math.Sqrt(v2)
				r := math.Max(-1, math.Min(1, c/(s1*s2)))
				bounds := func(k int, nu, sd float64) (float64, float64) {
					lo, hi := s.interval(j, k)
					return (lo - nu) / sd, (hi - nu) / sd
				}
				for k := 0; k < l.K[j]; k++ {
					if l.K[j] == 2 && k == 0 {
						continue
					}
					a1, b1 := bounds(k, nuPrev, s1)
					a2, b2 := bounds(k, nuCur, s2)
					dst = append(dst, bvn.Rect(a1, b1, a2, b2, r)/margin(a1, b1))
				}
				if l.K[j] == 2 {
					a1, b1 := bounds(0, nuPrev, s1)
					a2, b2 := bounds(1, nuCur, s2)
					dst = append(dst, bvn.Rect(a1, b1, a2, b2, r)/margin(a1, b1))
				}
			}
		}
	}
	return dst
}

// margin is P(a < Z < b) for a standard normal Z.
func margin(a, b float64) float64 {
	return 0.5*math.Erfc(-b/math.Sqrt2) - 0.5*math.Erfc(-a/math.Sqrt2)
}

func init() {
	label := func(what, scope string) func(catalog.Names) string {
		return func(n catalog.Names) string { return fmt.Sprintf("%s, %s (%s)%s", n.Outcome, what, scope, n.At()) }
	}
	catalog.Register(
		catalog.Kind{Name: "p_stay_typical", Section: catalog.Derived, Label: label("probability of staying in a category", "typical person")},
		catalog.Kind{Name: "p_stay_average", Section: catalog.Derived, Label: label("probability of staying in a category", "average over persons")},
		catalog.Kind{Name: "p_onset_typical", Section: catalog.Derived, Label: label("probability of the upper category after the lower", "typical person")},
		catalog.Kind{Name: "p_onset_average", Section: catalog.Derived, Label: label("probability of the upper category after the lower", "average over persons")},
	)
}
