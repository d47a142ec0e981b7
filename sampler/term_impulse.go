package sampler

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/lagstar/lagstar/catalog"
	"github.com/lagstar/lagstar/internal/dense"
	"github.com/lagstar/lagstar/priors"
	"gonum.org/v1/gonum/stat/distuv"
)

// impulseTerm reports, as derived quantities, the impulse responses of
// the within-person process: the response of every outcome's latent
// within part h = 1..H occasions after a one-sd innovation in one outcome
// (zeta_0 = sqrt(Sigma_kk) e_k, every other innovation of that occasion
// 0, the process at its mean before), that is A^h zeta_0, or under
// ARMA(1,1) A^(h-1) (A + M) zeta_0; and for a categorical outcome the
// change in P(upper category) (ordinal: in the mean category, lowest = 1,
// and in each category's probability) that the shift brings, with the later innovations integrated out (their
// variance W_h accumulates as W_1 = Sigma, W_h = A W_h-1 A' + Sigma, plus
// the moving-average terms), for a typical person and averaged over
// persons, for the average occasion (means and between variances
// averaged over the occasions t >= 2 when they differ).
// H is dynamics.impulse_horizon. Needs paths equal over time
// (with free paths the response depends on the occasion of the shock).
// Not causal effects: the response of the model's within part to a shock
// that the model treats as exogenous.
type impulseTerm struct{}

func (impulseTerm) Name() string { return "impulse responses" }

func (impulseTerm) Active(l *Layout) bool {
	return l.T > 1 && l.HasPaths() && !l.PathsFree && l.Horizon > 0
}

func (impulseTerm) Params(*Layout) []Param                    { return nil }
func (impulseTerm) Extract(_ *State, dst []float64) []float64 { return dst }
func (impulseTerm) Inject(_ *State, v []float64) []float64    { return v }
func (impulseTerm) Start(*State, *rand.Rand)                  {}
func (impulseTerm) Prior(*State, priors.Set, *rand.Rand)      {}
func (impulseTerm) Blocks(*Layout, Options) []Placed          { return nil }

func (impulseTerm) DerivedParams(l *Layout) []Param {
	var ps []Param
	names := l.outcomeNames()
	for k := 0; k < l.J; k++ {
		for j := 0; j < l.J; j++ {
			path := names[k] + "->" + names[j]
			for h := 1; h <= l.Horizon; h++ {
				ps = append(ps, Param{Name: fmt.Sprintf("impulse_response[%s,h=%d]", path, h), Kind: "impulse_response", Outcome: names[j], From: names[k], Index: h})
			}
			if !l.Cat[j] {
				continue
			}
			kind := "impulse_probability"
			if l.K[j] > 2 {
				kind = "impulse_score"
			}
			codes := l.Panel.Outcomes[j].Codes
			for _, scope := range transitionScopes {
				for h := 1; h <= l.Horizon; h++ {
					ps = append(ps, Param{Name: fmt.Sprintf("%s_%s[%s,h=%d]", kind, scope, path, h), Kind: kind + "_" + scope, Outcome: names[j], From: names[k], Index: h})
				}
				if l.K[j] == 2 {
					continue
				}
				// Ordinal: each category's probability change (Index is
				// the category, the horizon is in the name).
				for c := 0; c < l.K[j]; c++ {
					for h := 1; h <= l.Horizon; h++ {
						ps = append(ps, Param{Name: fmt.Sprintf("impulse_category_%s[%s,%s,h=%d]", scope, path, codes[c], h),
							Kind: "impulse_category_" + scope, Outcome: names[j], From: names[k], Index: c + 1})
					}
				}
			}
		}
	}
	return ps
}

// impulsePaths writes the responses resp[(h-1)*J+j] of every outcome j to
// a one-sd innovation in outcome k, h = 1..H, using tmp (J) as scratch.
func impulsePaths(s *State, k int, resp, tmp []float64) {
	l := s.L
	J, H := l.J, l.Horizon
	JJ := J * J
	a := s.A[JJ : 2*JJ]
	z := tmp[:J]
	clear(z)
	z[k] = math.Sqrt(s.Sig[JJ+k*J+k])
	dense.MulVec(resp[:J], a, z, J, J)
	if l.MA {
		for j := 0; j < J; j++ {
			resp[j] += s.M[2*J+j] * z[j]
		}
	}
	for h := 2; h <= H; h++ {
		dense.MulVec(resp[(h-1)*J:h*J], a, resp[(h-2)*J:(h-1)*J], J, J)
	}
}

// impulseVariances writes W_h (H blocks of J x J): the covariance of the
// within part h occasions after the shock that the later innovations
// bring. tmp needs 2 J^2.
func impulseVariances(s *State, w, tmp []float64) {
	l := s.L
	J, H := l.J, l.Horizon
	JJ := J * J
	a, sig := s.A[JJ:2*JJ], s.Sig[JJ:2*JJ]
	copy(w[:JJ], sig)
	t1, t2 := tmp[:JJ], tmp[JJ:2*JJ]
	for h := 2; h <= H; h++ {
		cur := w[(h-1)*JJ : h*JJ]
		dense.Mul(t1, a, w[(h-2)*JJ:(h-1)*JJ], J, J, J)
		dense.MulBT(cur, t1, a, J, J, J)
		for q := range cur {
			cur[q] += sig[q]
		}
		if l.MA {
			// + M Sigma M + A Sigma M + M Sigma A' (Cov(w, zeta) = Sigma).
			m := s.M[2*J : 3*J]
			dense.Mul(t2, a, sig, J, J, J)
			for r := 0; r < J; r++ {
				for c := 0; c < J; c++ {
					cur[r*J+c] += m[r]*sig[r*J+c]*m[c] + t2[r*J+c]*m[c] + m[r]*t2[c*J+r]
				}
			}
		}
	}
}

func (impulseTerm) ExtractDerived(s *State, dw *DerivedWork, dst []float64) []float64 {
	l := s.L
	J, H := l.J, l.Horizon
	JJ := J * J
	resp, w, tmp := dw.imp[:H*J], dw.imp[H*J:H*J+H*JJ], dw.imp[H*J+H*JJ:]
	impulseVariances(s, w, tmp)
	norm := distuv.UnitNormal
	// score returns the mean category (lowest = 1) of outcome j, or
	// P(upper) for a binary one, for a latent mean mu and sd.
	score := func(j int, mu, sd float64) float64 {
		if l.K[j] == 2 {
			return 1 - norm.CDF((s.Tau[j][0]-mu)/sd)
		}
		m := 1.0 // E[category] = 1 + sum_c P(y > c)
		for _, tau := range s.Tau[j] {
			m += 1 - norm.CDF((tau-mu)/sd)
		}
		return m
	}
	// catProb returns P(y_j = c) for a latent mean mu and sd.
	catProb := func(j, c int, mu, sd float64) float64 {
		lo, hi := s.interval(j, c)
		return norm.CDF((hi-mu)/sd) - norm.CDF((lo-mu)/sd)
	}
	for k := 0; k < J; k++ {
		impulsePaths(s, k, resp, tmp)
		for j := 0; j < J; j++ {
			for h := 1; h <= H; h++ {
				dst = append(dst, resp[(h-1)*J+j])
			}
			if !l.Cat[j] {
				continue
			}
			// The average occasion: latent mean and between variance
			// averaged over the occasions t >= 2 when they differ.
			last := l.meanOccasions()
			mu, bv := 0.0, 0.0
			for t := 1; t <= last; t++ {
				mu += s.CellMean(t, j) / float64(last)
				bv += s.BetweenCov(t, j, t, j) / float64(last)
			}
			for _, scope := range transitionScopes {
				sdAt := func(h int) float64 {
					v := w[(h-1)*JJ+j*J+j]
					if scope == "average" {
						v += bv
					}
					return math.Sqrt(v)
				}
				for h := 1; h <= H; h++ {
					sd := sdAt(h)
					dst = append(dst, score(j, mu+resp[(h-1)*J+j], sd)-score(j, mu, sd))
				}
				if l.K[j] == 2 {
					continue
				}
				for c := 0; c < l.K[j]; c++ {
					for h := 1; h <= H; h++ {
						sd := sdAt(h)
						dst = append(dst, catProb(j, c, mu+resp[(h-1)*J+j], sd)-catProb(j, c, mu, sd))
					}
				}
			}
		}
	}
	return dst
}

func init() {
	label := func(what string) func(catalog.Names) string {
		return func(n catalog.Names) string {
			return fmt.Sprintf("%s → %s, %s %s after a one-sd innovation", n.From, n.Outcome, what, plural(n.Index, "occasion", "occasions"))
		}
	}
	catalog.Register(
		catalog.Kind{Name: "impulse_response", Section: catalog.Probability, Manuscript: "Impulse responses (latent within part)", Label: label("latent within-part response")},
		catalog.Kind{Name: "impulse_probability_typical", Section: catalog.Probability, Label: label("change in P(upper), typical person,")},
		catalog.Kind{Name: "impulse_probability_average", Section: catalog.Probability, Label: label("change in P(upper), average over persons,")},
		catalog.Kind{Name: "impulse_score_typical", Section: catalog.Probability, Label: label("change in the mean category, typical person,")},
		catalog.Kind{Name: "impulse_score_average", Section: catalog.Probability, Label: label("change in the mean category, average over persons,")},
		catalog.Kind{Name: "impulse_category_typical", Section: catalog.Probability},
		catalog.Kind{Name: "impulse_category_average", Section: catalog.Probability},
	)
}

// plural writes n with the singular or plural noun.
func plural(n int, one, many string) string {
	if n == 1 {
		return "1 " + one
	}
	return fmt.Sprintf("%d %s", n, many)
}
