package sampler

import (
	"fmt"
	"math/rand/v2"
	"slices"
	"strings"

	"github.com/lagstar/lagstar/catalog"
	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/priors"
)

// dynamicTerm is the lagged latent response (dynamics.lag_on:
// latent_response): for person i, with the first occasion given,
//
//	y*_i1 = c_1 + Lambda b_i + zeta_i1,          zeta_i1 ~ N(0, Sigma_1),
//	y*_it = c_t + b_i + A_t y*_i,t-1 + zeta_it,   zeta_it ~ N(0, Sigma_t), t >= 2,
//
// b_i ~ N(0, Psi). The carry-over A_t acts on the latent response itself,
// stable person differences included, rather than on a within-person
// residual. The first occasion has its own intercept, covariance and
// loadings Lambda on the random intercepts, so (y*_i1, b_i) are freely
// correlated: the first occasion is treated as given (a conditional
// likelihood in the sense of Wooldridge 2005, J. Appl. Econometrics 20:39,
// whose initial-conditions problem the free loadings address) and the
// process need not have run stationary before it.
//
// The model is kept in the form the other terms share: y*_it = m_t +
// S_t b_i + w_it, with w_it = A_t w_i,t-1 + zeta_it, m_1 = c_1, m_t = c_t +
// A_t m_t-1, S_1 = Lambda, S_t = I + A_t S_t-1 (substitute and the two
// forms agree term by term). So the latent responses, innovation
// covariances, predictive checks, the person likelihood of compare and
// the derived quantities need nothing new: State.Nu holds m_t and the
// term's storage S_t (syncDyn). The Gibbs blocks that draw c, Lambda,
// A_t and b work in the dynamic form, where each full conditional is a
// normal regression (dynamic.go).
//
// Own storage: the free intercepts (Layout.DynIdx) and Lambda (J x J,
// fixed entries 0; the identity without random intercepts). S_t follows
// from them and A (State.Load, recomputed by syncDyn, not saved).
type dynamicTerm struct{}

func (dynamicTerm) Name() string { return "lagged latent response" }

func (dynamicTerm) Active(l *Layout) bool { return l.Dyn }

func (dynamicTerm) OwnSize(l *Layout) int { return l.NDyn + l.J*l.J }

// dynLayout places the intercepts c_tj: with intercepts free over time
// one per occasion and outcome, with equal ones one for the first
// occasion and one for the rest; a categorical outcome's first-occasion
// intercept is 0 (its thresholds carry its level), and an occasion nobody
// answered keeps its intercept at 0 (it would rest on the prior alone).
// The loadings are free with random intercepts: the diagonal, and every
// entry with cross-lags.
func (l *Layout) dynLayout(observed [][]int) {
	J, T := l.J, l.T
	l.DynIdx = make([]int, T*J)
	for j := 0; j < J; j++ {
		rest := -1
		var unanswered []string
		for t := 0; t < T; t++ {
			k := t*J + j
			l.DynIdx[k] = -1
			if t > 0 && l.MeansFree && observed[j][t] == 0 {
				unanswered = append(unanswered, fmt.Sprint(l.Panel.Occasions[t]))
			}
			switch {
			case t == 0 && l.Cat[j]:
			case t == 0 || (l.MeansFree && observed[j][t] > 0):
				l.DynIdx[k] = l.NDyn
				l.NDyn++
			case !l.MeansFree:
				if rest < 0 {
					rest = l.NDyn
					l.NDyn++
				}
				l.DynIdx[k] = rest
			}
		}
		if len(unanswered) > 0 {
			l.Notes = append(l.Notes, fmt.Sprintf("outcome %q was answered by nobody at occasion %s: no intercept of the lagged equation is estimated there (it would rest on the prior alone); it stays at 0", l.Panel.Outcomes[j].Name, strings.Join(unanswered, ", ")))
		}
	}
	l.dynAt = make([][2]int, l.NDyn)
	seen := make([]bool, l.NDyn)
	for j := 0; j < J; j++ {
		for t := 0; t < T; t++ {
			if idx := l.DynIdx[t*J+j]; idx >= 0 && !seen[idx] {
				seen[idx] = true
				l.dynAt[idx] = [2]int{t, j}
			}
		}
	}
	l.LoadFree = make([]bool, J*J)
	if l.RI {
		for r := 0; r < J; r++ {
			for c := 0; c < J; c++ {
				l.LoadFree[r*J+c] = r == c || l.Lags == model.LagsCross
			}
		}
	}
}

// dynParts returns the term's free intercepts, loadings and between
// loadings S_t.
func (s *State) dynParts() (c, lam, load []float64) {
	o := s.Own(dynamicTerm{})
	n := s.L.NDyn
	return o[:n], o[n:], s.Load
}

// dynIntercept returns c_tj on the analysis scale.
func (s *State) dynIntercept(c []float64, t, j int) float64 {
	if k := s.L.DynIdx[t*s.L.J+j]; k >= 0 {
		return c[k]
	}
	return 0
}

// syncDyn recomputes m_t (State.Nu) and the between loadings S_t from the
// intercepts, loadings and carry-over.
func (s *State) syncDyn() {
	c, lam, load := s.dynParts()
	dynRecursion(s.Nu, load, func(t, j int) float64 { return s.dynIntercept(c, t, j) }, s.A, lam, s.L.J, s.L.T)
}

// dynRecursion writes m_t = c_t + A_t m_t-1 (m_1 = c_1) into nu (T x J)
// and S_t = I + A_t S_t-1 (S_1 = lam) into load (T blocks of J x J), a
// holding A_t (T blocks, block 0 unused).
func dynRecursion(nu, load []float64, c func(t, j int) float64, a, lam []float64, J, T int) {
	JJ := J * J
	copy(load[:JJ], lam)
	for j := 0; j < J; j++ {
		nu[j] = c(0, j)
	}
	for t := 1; t < T; t++ {
		at := a[t*JJ : (t+1)*JJ]
		prev, cur := load[(t-1)*JJ:t*JJ], load[t*JJ:(t+1)*JJ]
		for r := 0; r < J; r++ {
			m := c(t, r)
			for k := 0; k < J; k++ {
				m += at[r*J+k] * nu[(t-1)*J+k]
				v := 0.0
				for q := 0; q < J; q++ {
					v += at[r*J+q] * prev[q*J+k]
				}
				if r == k {
					v++
				}
				cur[r*J+k] = v
			}
			nu[t*J+r] = m
		}
	}
}

// eachDyn calls fn for every free intercept in index order with the
// first occasion and outcome it applies to (Layout.dynAt, fixed with the
// layout so that extracting a draw allocates nothing).
func eachDyn(l *Layout, fn func(idx, t, j int)) {
	for idx, tj := range l.dynAt {
		fn(idx, tj[0], tj[1])
	}
}

func (dynamicTerm) Params(l *Layout) []Param {
	var ps []Param
	names := l.outcomeNames()
	eachDyn(l, func(_, t, j int) {
		p := Param{Kind: "lag_intercept", Outcome: names[j]}
		switch {
		case l.MeansFree || t == 0:
			p.Occasion = l.occasion(t)
			p.Name = fmt.Sprintf("lag_intercept[%s,t=%d]", names[j], *p.Occasion)
		default:
			p.Name = fmt.Sprintf("lag_intercept[%s]", names[j])
		}
		ps = append(ps, p)
	})
	for r := 0; r < l.J; r++ {
		for c := 0; c < l.J; c++ {
			if l.LoadFree[r*l.J+c] {
				ps = append(ps, Param{Name: fmt.Sprintf("first_loading[%s<-ri:%s]", names[r], names[c]), Kind: "first_loading", Outcome: names[r], From: names[c]})
			}
		}
	}
	return ps
}

// Extract reports the intercepts and loadings on the outcomes' own
// scales: with y = center + scale y*, the first occasion's intercept is
// center + scale c_1 and a later one center_j + scale_j c_tj - sum_k
// A_t[j,k] (scale_j / scale_k) center_k; a loading scales as a path.
func (dynamicTerm) Extract(s *State, dst []float64) []float64 {
	l := s.L
	c, lam, _ := s.dynParts()
	eachDyn(l, func(idx, t, j int) { dst = append(dst, s.dynOwnIntercept(c[idx], t, j)) })
	J := l.J
	for r := 0; r < J; r++ {
		for k := 0; k < J; k++ {
			if l.LoadFree[r*J+k] {
				dst = append(dst, lam[r*J+k]*l.Scale[r]/l.Scale[k])
			}
		}
	}
	return dst
}

// dynOwnIntercept returns intercept value v of outcome j at occasion t on
// the outcome's own scale.
func (s *State) dynOwnIntercept(v float64, t, j int) float64 {
	l := s.L
	J := l.J
	x := l.Center[j] + l.Scale[j]*v
	if t > 0 {
		a := s.A[t*J*J+j*J : t*J*J+j*J+J]
		for k, ak := range a {
			x -= ak * l.Scale[j] / l.Scale[k] * l.Center[k]
		}
	}
	return x
}

// Inject: the paths are injected before (registry order), so the own
// scale's intercepts convert back.
func (dynamicTerm) Inject(s *State, v []float64) []float64 {
	l := s.L
	c, lam, _ := s.dynParts()
	eachDyn(l, func(idx, t, j int) {
		c[idx] = (v[0] - s.dynOwnIntercept(0, t, j)) / l.Scale[j]
		v = v[1:]
	})
	J := l.J
	for r := 0; r < J; r++ {
		for k := 0; k < J; k++ {
			if l.LoadFree[r*J+k] {
				lam[r*J+k] = v[0] * l.Scale[k] / l.Scale[r]
				v = v[1:]
			}
		}
	}
	s.SyncNu()
	return v
}

// resetLoadings sets Lambda to the identity where it is not free.
func (s *State) resetLoadings(lam []float64) {
	J := s.L.J
	for k := range lam {
		if !s.L.LoadFree[k] {
			lam[k] = 0
			if !s.L.RI && k%(J+1) == 0 {
				lam[k] = 1
			}
		}
	}
}

// Start: intercepts uniform on (-0.1, 0.1); free loadings 1 on the
// diagonal and 0 off it, plus uniform (-0.1, 0.1).
func (dynamicTerm) Start(s *State, rng *rand.Rand) {
	c, lam, _ := s.dynParts()
	for k := range c {
		c[k] = 0.2 * (rng.Float64() - 0.5)
	}
	J := s.L.J
	for k := range lam {
		if s.L.LoadFree[k] {
			lam[k] = 0.2 * (rng.Float64() - 0.5)
			if k%(J+1) == 0 {
				lam[k]++
			}
		}
	}
	s.resetLoadings(lam)
	s.SyncNu()
}

// Prior: intercepts normal(0, MeanSD^2); loadings normal(1, PathSD^2) on
// the diagonal and normal(0, PathSD^2) off it.
func (dynamicTerm) Prior(s *State, pr priors.Set, rng *rand.Rand) {
	c, lam, _ := s.dynParts()
	for k := range c {
		c[k] = pr.MeanSD * rng.NormFloat64()
	}
	J := s.L.J
	for k := range lam {
		if s.L.LoadFree[k] {
			lam[k] = pr.PathSD * rng.NormFloat64()
			if k%(J+1) == 0 {
				lam[k]++
			}
		}
	}
	s.resetLoadings(lam)
	s.SyncNu()
}

// Blocks: the intercepts; with random intercepts the loadings; not with
// plain data augmentation, the location moves of each categorical outcome
// (dynamic.go).
func (dynamicTerm) Blocks(l *Layout, opt Options) []Placed {
	ps := []Placed{{slotMeans, NewLagInterceptBlock(l)}}
	if l.RI {
		ps = append(ps, Placed{slotLoadings, NewLoadingBlock(l)})
	}
	if opt.ThresholdUpdate != model.ThresholdAlbertChib && slices.Contains(l.Cat, true) {
		ps = append(ps, Placed{slotLocation, NewLagLocationBlock(l)})
	}
	return ps
}

func init() {
	catalog.Register(
		catalog.Kind{Name: "lag_intercept", Section: catalog.Measurement, Tabled: true, Manuscript: "Within persons",
			Label: func(n catalog.Names) string { return n.Outcome + ", intercept of the lagged equation" + n.At() }},
		catalog.Kind{Name: "first_loading", Section: catalog.Between, Tabled: true, Manuscript: "Between persons",
			Label: func(n catalog.Names) string {
				return n.Outcome + " at the first occasion, loading on the random intercept of " + n.From
			}},
		catalog.Kind{Name: "latent_autoregression", Section: catalog.Within, Tabled: true, Manuscript: "Within persons", Standardized: "std_latent_autoregression",
			Label: func(n catalog.Names) string { return n.Outcome + ", carry-over of the latent response" + n.At() }},
		catalog.Kind{Name: "latent_crosslag", Section: catalog.Within, Tabled: true, Manuscript: "Within persons", Standardized: "std_latent_crosslag",
			Label: func(n catalog.Names) string {
				return n.From + " → " + n.Outcome + ", cross-lag of the latent response" + n.At()
			}},
		catalog.Kind{Name: "std_latent_autoregression", Section: catalog.Derived, Tabled: true},
		catalog.Kind{Name: "std_latent_crosslag", Section: catalog.Derived, Tabled: true},
	)
}

// DynamicForm returns, on the analysis scale, the intercepts c_tj of the
// lagged latent response's dynamic equation (T x J, fixed ones 0) and
// the first occasion's loadings Lambda (J x J); nil without the term.
func (s *State) DynamicForm() (c, lambda []float64) {
	if !s.L.Dyn {
		return nil, nil
	}
	cf, lam, _ := s.dynParts()
	c = make([]float64, s.L.T*s.L.J)
	for t := 0; t < s.L.T; t++ {
		for j := 0; j < s.L.J; j++ {
			c[t*s.L.J+j] = s.dynIntercept(cf, t, j)
		}
	}
	return c, slices.Clone(lam)
}
