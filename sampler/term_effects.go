package sampler

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"github.com/lagstar/lagstar/catalog"
	"github.com/lagstar/lagstar/internal/bvn"
	"github.com/lagstar/lagstar/priors"
	"gonum.org/v1/gonum/stat/distuv"
)

// effectTerm reports, as derived quantities, each carry-over and cross-lag
// into a categorical outcome on the probability scale (exact per draw):
//
//   - the effect: the change in P(y_jt = c) when the predictor k's
//     within-person latent part at t-1 moves from its mean by one
//     within-person sd, the other lagged within parts held at their means
//     (y*_jt is then normal with mean mu_jt + A_jk x and the innovation
//     variance Sigma_jj);
//   - for a categorical predictor, the contrast: the change in P(y_jt = c)
//     between a previous answer in k's highest and in its lowest category,
//     integrating over the latent response given the category (a bivariate
//     normal rectangle over the marginal probability, as for the
//     transition probabilities; the other outcomes are not held fixed).
//
// Each for a typical person (between part at its mean) and averaged over
// persons (the between variance joins the within one: b enters y*
// additively and is normal, so the average is again a normal probability,
// no quadrature needed). A binary outcome reports the change in P(upper)
// (prob_effect_*, prob_contrast_*); an ordinal one the change in its mean
// category score, lowest = 1 (score_effect_*, score_contrast_*), and per
// category (category_effect_*, category_contrast_*, summary.json only).
// With paths equal over time, one set at the stationary variance (when
// the carry-over is stable, else the last occasion's) for the average
// occasion: the latent means and between covariances averaged over the
// occasions t >= 2 when they differ (means free over time, growth); with
// paths free, one set per occasion t >= 2.
// Under ARMA(1,1) the effect also holds the previous innovation at its
// mean (so its shift is still A_jk times the sd), and the contrast's
// covariance gains M Sigma.
type effectTerm struct{}

func (effectTerm) Name() string { return "probability-scale effects" }

func (effectTerm) Active(l *Layout) bool {
	return l.T > 1 && l.HasPaths() && slices.Contains(l.Cat, true)
}

func (effectTerm) Params(*Layout) []Param                    { return nil }
func (effectTerm) Extract(_ *State, dst []float64) []float64 { return dst }
func (effectTerm) Inject(_ *State, v []float64) []float64    { return v }
func (effectTerm) Start(*State, *rand.Rand)                  {}
func (effectTerm) Prior(*State, priors.Set, *rand.Rand)      {}
func (effectTerm) Blocks(*Layout, Options) []Placed          { return nil }

// eachEffectPath calls fn for every free path k -> j into a categorical
// outcome j, in row-major order of A.
func eachEffectPath(l *Layout, fn func(j, k int)) {
	for j := 0; j < l.J; j++ {
		for k := 0; k < l.J; k++ {
			if l.Cat[j] && l.PathFree[j*l.J+k] {
				fn(j, k)
			}
		}
	}
}

func (effectTerm) DerivedParams(l *Layout) []Param {
	var ps []Param
	names := l.outcomeNames()
	for _, t := range l.pathOccasionsOrAll() {
		suffix := ""
		var o *int
		if t >= 0 {
			o = l.occasion(t)
			suffix = fmt.Sprintf(",t=%d", *o)
		}
		eachEffectPath(l, func(j, k int) {
			codes := l.Panel.Outcomes[j].Codes
			path := names[k] + "->" + names[j]
			for _, what := range effectKinds(l, k) {
				for _, scope := range transitionScopes {
					p := Param{Outcome: names[j], From: names[k], Occasion: o}
					switch {
					case l.K[j] == 2:
						p.Kind = "prob_" + what + "_" + scope
						p.Index = 2
						p.Name = fmt.Sprintf("%s[%s,%s%s]", p.Kind, path, codes[1], suffix)
						ps = append(ps, p)
					default:
						p.Kind = "score_" + what + "_" + scope
						p.Name = fmt.Sprintf("%s[%s%s]", p.Kind, path, suffix)
						ps = append(ps, p)
						for c := 0; c < l.K[j]; c++ {
							q := p
							q.Kind = "category_" + what + "_" + scope
							q.Index = c + 1
							q.Name = fmt.Sprintf("%s[%s,%s%s]", q.Kind, path, codes[c], suffix)
							ps = append(ps, q)
						}
					}
				}
			}
		})
	}
	return ps
}

// effectKinds: every path has an effect, a categorical predictor also a
// contrast.
func effectKinds(l *Layout, k int) []string {
	if l.Cat[k] {
		return []string{"effect", "contrast"}
	}
	return []string{"effect"}
}

func (effectTerm) ExtractDerived(s *State, dw *DerivedWork, dst []float64) []float64 {
	l := s.L
	J := l.J
	JJ := J * J
	norm := distuv.UnitNormal
	probs := func(dst []float64, j int, mu, sd float64) {
		prev := 0.0
		for c := 0; c < l.K[j]; c++ {
			cum := 1.0
			if c < l.K[j]-1 {
				cum = norm.CDF((s.Tau[j][c] - mu) / sd)
			}
			dst[c] = cum - prev
			prev = cum
		}
	}
	var hi, lo [12]float64
	for _, ro := range l.pathOccasionsOrAll() {
		// With free paths the occasion ro; else the reference variance
		// and the between part's means and covariances averaged over the
		// occasions t >= 1 (one occasion when they do not differ).
		cur, prev := ro, ro-1
		vPrev, vCur := dw.refV, dw.refV
		first, last := ro, ro
		if ro < 0 {
			cur, prev = 1, 0
			first, last = 1, l.meanOccasions()
		} else {
			vPrev, vCur = dw.v[prev*JJ:cur*JJ], dw.v[cur*JJ:(cur+1)*JJ]
		}
		n := float64(last - first + 1)
		// avgOver averages f(t) over t = first..last.
		avgOver := func(f func(t int) float64) float64 {
			x := 0.0
			for t := first; t <= last; t++ {
				x += f(t)
			}
			return x / n
		}
		a, sig := s.A[cur*JJ:(cur+1)*JJ], s.Sig[cur*JJ:(cur+1)*JJ]
		eachEffectPath(l, func(j, k int) {
			mu := avgOver(func(t int) float64 { return s.CellMean(t, j) })
			muK := avgOver(func(t int) float64 { return s.CellMean(t-1, k) })
			bj := avgOver(func(t int) float64 { return s.BetweenCov(t, j, t, j) })
			bk := avgOver(func(t int) float64 { return s.BetweenCov(t-1, k, t-1, k) })
			bjk := avgOver(func(t int) float64 { return s.BetweenCov(t, j, t-1, k) })
			for _, what := range effectKinds(l, k) {
				for _, scope := range transitionScopes {
					avg := scope == "average"
					switch what {
					case "effect":
						v := sig[j*J+j]
						if avg {
							v += bj
						}
						sd := math.Sqrt(v)
						probs(lo[:], j, mu, sd)
						probs(hi[:], j, mu+a[j*J+k]*math.Sqrt(vPrev[k*J+k]), sd)
					case "contrast":
						v1, v2 := vPrev[k*J+k], vCur[j*J+j]
						c := 0.0
						for m := 0; m < J; m++ {
							c += a[j*J+m] * vPrev[m*J+k]
						}
						if l.MA {
							// + M Sigma: Cov(zeta_t-1, w_t-1) = Sigma_t-1
							// (at the reference: the stationary ARMA,
							// M from the third occasion on).
							tm, ts := cur, prev
							if ro < 0 {
								tm, ts = 2, 1
							}
							c += s.M[tm*J+j] * s.Sig[ts*JJ+j*J+k]
						}
						if avg {
							v1, v2, c = v1+bk, v2+bj, c+bjk
						}
						s1, s2 := math.Sqrt(v1), math.Sqrt(v2)
						r := math.Max(-1, math.Min(1, c/(s1*s2)))
						for _, side := range []struct {
							cat int
							out []float64
						}{{0, lo[:]}, {l.K[k] - 1, hi[:]}} {
							ka, kb := s.interval(k, side.cat)
							a1, b1 := (ka-muK)/s1, (kb-muK)/s1
							m := margin(a1, b1)
							for q := 0; q < l.K[j]; q++ {
								ja, jb := s.interval(j, q)
								side.out[q] = bvn.Rect(a1, b1, (ja-mu)/s2, (jb-mu)/s2, r) / m
							}
						}
					}
					if l.K[j] == 2 {
						dst = append(dst, hi[1]-lo[1])
						continue
					}
					score := 0.0
					for q := 0; q < l.K[j]; q++ {
						score += float64(q+1) * (hi[q] - lo[q])
					}
					dst = append(dst, score)
					for q := 0; q < l.K[j]; q++ {
						dst = append(dst, hi[q]-lo[q])
					}
				}
			}
		})
	}
	return dst
}

// meanOccasions returns the last occasion the means are averaged over
// with paths equal over time: T-1 when the means differ between occasions
// (means free over time, growth, a lagged latent response, whose m_t and
// between parts change over the occasions), else 1 (every occasion gives
// the same).
func (l *Layout) meanOccasions() int {
	if l.MeansFree || l.Growth || l.Dyn {
		return l.T - 1
	}
	return 1
}

// pathOccasionsOrAll returns -1 (one set, averaged over the occasions)
// with paths equal over time, else the occasions 1..T-1.
func (l *Layout) pathOccasionsOrAll() []int {
	if l.PathsFree {
		return l.pathOccasions()
	}
	return []int{-1}
}

func init() {
	label := func(what, scope string) func(catalog.Names) string {
		return func(n catalog.Names) string {
			return fmt.Sprintf("%s → %s, %s (%s)%s", n.From, n.Outcome, what, scope, n.At())
		}
	}
	var kinds []catalog.Kind
	for _, scope := range []struct{ key, text string }{{"typical", "typical person"}, {"average", "average over persons"}} {
		kinds = append(kinds,
			catalog.Kind{Name: "prob_effect_" + scope.key, Section: catalog.Probability, Tabled: true, Manuscript: "Effects on the probability scale",
				Label: label("change in P(upper) per within-sd of the predictor", scope.text)},
			catalog.Kind{Name: "prob_contrast_" + scope.key, Section: catalog.Probability, Tabled: true, Manuscript: "Effects on the probability scale",
				Label: label("change in P(upper) after the highest vs the lowest category", scope.text)},
			catalog.Kind{Name: "score_effect_" + scope.key, Section: catalog.Probability, Tabled: true, Manuscript: "Effects on the probability scale",
				Label: label("change in the mean category per within-sd of the predictor", scope.text)},
			catalog.Kind{Name: "score_contrast_" + scope.key, Section: catalog.Probability, Tabled: true, Manuscript: "Effects on the probability scale",
				Label: label("change in the mean category after the highest vs the lowest category", scope.text)},
			catalog.Kind{Name: "category_effect_" + scope.key, Section: catalog.Probability},
			catalog.Kind{Name: "category_contrast_" + scope.key, Section: catalog.Probability},
		)
	}
	catalog.Register(kinds...)
}
