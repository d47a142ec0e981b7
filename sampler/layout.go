package sampler

import (
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/priors"
)

// Layout is the fixed structure of a fit: which parameters are free, how the
// mean parameters map onto occasions, which covariance groups exist. It is
// built once from the model file and the panel and shared read-only by all
// chains.
type Layout struct {
	Spec   *model.Spec
	Panel  *model.Panel
	Priors priors.Set

	J, T, N   int
	Cat       []bool    // outcome j is categorical
	K         []int     // categories (0 continuous)
	Center    []float64 // continuous outcomes are analysed as (y - Center)/Scale
	Scale     []float64
	RI        bool
	Lags      model.Lags
	ResCorr   bool
	PathsFree bool
	Stat      bool // stationary first occasion
	MeansFree bool
	// MA: ARMA(1,1) within parts (term_movingavg.go); maFixed (tests
	// only) keeps the moving-average coefficients where they start.
	MA, maFixed bool
	// Growth: random slopes over the time scores Time (one per grid
	// occasion; term_growth.go). The growth line replaces the occasion
	// means (NMean = 0).
	Growth bool
	Time   []float64
	// Horizon is the number of occasions the impulse responses run to
	// (term_impulse.go; 0: none).
	Horizon int
	// Dyn: the latent response is regressed on its previous value
	// (dynamics.lag_on: latent_response; term_dynamic.go). DynIdx[t*J+j]
	// is the index of the free intercept c_tj of the dynamic equation
	// (-1: fixed at 0), NDyn their number; LoadFree[r*J+c] marks the free
	// loadings of the first occasion on the random intercepts. The
	// dynamic intercepts replace the occasion means (NMean = 0).
	Dyn      bool
	DynIdx   []int
	NDyn     int
	LoadFree []bool
	dynAt    [][2]int // occasion and outcome of each free intercept

	// MeanIdx[t*J+j] is the index of the free mean parameter of outcome j at
	// grid occasion t, or -1 where the mean is fixed at 0: a categorical
	// outcome's anchor occasion (Anchor[j], see model.MeanAnchors), and
	// any occasion where nobody answered the outcome (its mean would touch
	// no data).
	MeanIdx []int
	NMean   int
	Anchor  []int
	// Notes are remarks on the layout for the summary (a moved or
	// sparsely observed anchor).
	Notes []string
	// PathFree[r*J+c] marks A[r,c] as free.
	PathFree []bool
	// Groups are the free covariance matrices; GroupOf[t] is the group of
	// Sigma_t (t = 0: first occasion), or -1 for a stationary first occasion.
	Groups  []CovGroup
	GroupOf []int
	// CountAt[t] is the number of persons observed up to at least grid occasion t.
	CountAt []int
	MaxLen  int
	// ShardStart[s] is the first person of shard s (see shard.go); the
	// last entry is N.
	ShardStart []int
	// Terms are the model terms the layout has, in registry order
	// (registry.go).
	Terms []Term
	// The occasions that carry path parameters, ICCs and transition
	// probabilities (pathOccasions, iccOccasions, transitionOccasions),
	// fixed with the layout so extracting a draw allocates nothing.
	pathOcc, iccOcc, transOcc []int
}

// NF is the number of random effects per person: J intercepts, and J
// slopes more under growth (the order of Psi's rows).
func (l *Layout) NF() int {
	if l.Growth {
		return 2 * l.J
	}
	return l.J
}

// CovGroup is one free covariance matrix: the first occasion's or an
// innovation covariance shared by the occasions in Occ.
type CovGroup struct {
	Initial bool
	Occ     []int // grid occasions using this matrix
	FreeSD  []bool
	Corr    bool
}

// NewLayout derives the layout; sp and pan must have passed model.Identify.
func NewLayout(sp *model.Spec, pan *model.Panel, pr priors.Set) *Layout {
	J, T := pan.J(), pan.T()
	l := &Layout{Spec: sp, Panel: pan, Priors: pr, J: J, T: T, N: len(pan.Persons),
		RI: sp.Between.RandomIntercepts, Lags: sp.Within.Lags, ResCorr: sp.Within.ResidualCorrelation,
		PathsFree: sp.Within.PathsFree, Stat: sp.Within.StationaryStart, MeansFree: sp.Means.Free,
		MA: sp.Within.MovingAverage && pan.T() > 2, Growth: sp.Between.RandomSlopes, Horizon: sp.Within.ImpulseHorizon,
		Dyn: sp.Within.LatentLag() && sp.Within.Lags != model.LagsNone && pan.T() > 1}
	if l.Growth {
		l.Time = model.TimeScores(sp, pan)
	}
	if T < 2 {
		l.Lags = model.LagsNone
	}
	l.Cat = make([]bool, J)
	l.K = make([]int, J)
	l.Center = make([]float64, J)
	l.Scale = make([]float64, J)
	for j, o := range pan.Outcomes {
		l.Cat[j] = o.Type.Categorical()
		l.K[j] = o.K
		l.Scale[j] = 1
		if !l.Cat[j] {
			l.Center[j], l.Scale[j] = meanSD(pan, j)
		}
	}
	// Means: categorical outcomes have nu_j = 0 at their anchor occasion
	// (location from thresholds); continuous outcomes have a free first mean.
	l.Anchor, l.Notes = model.MeanAnchors(sp, pan)
	if l.Dyn {
		// The first occasion is given: a categorical outcome's intercept
		// is 0 there (term_dynamic.go), whatever the means section says.
		l.Notes = nil
		for j := range l.Anchor {
			l.Anchor[j] = -1
			if l.Cat[j] {
				l.Anchor[j] = 0
			}
		}
	}
	observed := make([][]int, J)
	for j := range observed {
		observed[j] = pan.ObservedAt(j)
	}
	l.MeanIdx = make([]int, T*J)
	for i := range l.MeanIdx {
		l.MeanIdx[i] = -1
	}
	unanswered := make([][]string, J)
	for t := 0; t < T && !l.Dyn; t++ {
		for j := 0; j < J; j++ {
			if l.MeansFree && t != l.Anchor[j] && observed[j][t] > 0 {
				l.MeanIdx[t*J+j] = l.NMean
				l.NMean++
			} else if l.MeansFree && t != l.Anchor[j] {
				unanswered[j] = append(unanswered[j], strconv.Itoa(pan.Occasions[t]))
			}
		}
	}
	for j, occ := range unanswered {
		if len(occ) > 0 {
			l.Notes = append(l.Notes, fmt.Sprintf("outcome %q was answered by nobody at occasion %s: no mean is estimated there (it would rest on the prior alone) and the mean stays fixed there (at the anchor occasion's level for a categorical outcome, at the overall mean for a continuous one)", pan.Outcomes[j].Name, strings.Join(occ, ", ")))
		}
	}
	if l.Dyn {
		l.dynLayout(observed)
	}
	if !l.MeansFree && !l.Growth && !l.Dyn {
		for j := 0; j < J; j++ {
			if !l.Cat[j] {
				for t := 0; t < T; t++ {
					l.MeanIdx[t*J+j] = l.NMean
				}
				l.NMean++
			}
		}
	}
	l.PathFree = make([]bool, J*J)
	for r := 0; r < J; r++ {
		for c := 0; c < J; c++ {
			l.PathFree[r*J+c] = l.Lags == model.LagsCross || (l.Lags == model.LagsOwn && r == c)
		}
	}
	freeSD := make([]bool, J)
	for j := range freeSD {
		freeSD[j] = !l.Cat[j]
	}
	corr := l.ResCorr && J > 1
	l.GroupOf = make([]int, T)
	add := func(g CovGroup) int {
		l.Groups = append(l.Groups, g)
		return len(l.Groups) - 1
	}
	if T > 1 {
		if l.PathsFree {
			for t := 1; t < T; t++ {
				l.GroupOf[t] = add(CovGroup{Occ: []int{t}, FreeSD: freeSD, Corr: corr})
			}
		} else {
			occ := make([]int, 0, T-1)
			for t := 1; t < T; t++ {
				occ = append(occ, t)
			}
			g := add(CovGroup{Occ: occ, FreeSD: freeSD, Corr: corr})
			for t := 1; t < T; t++ {
				l.GroupOf[t] = g
			}
		}
	}
	// First occasion: its own free group; under a stationary start it is
	// derived from the paths (-1), or, without carry-over, it is the
	// innovation distribution itself.
	switch {
	case l.Stat && l.HasPaths():
		l.GroupOf[0] = -1
	case l.Stat && T > 1:
		g := l.GroupOf[1]
		l.GroupOf[0] = g
		l.Groups[g].Occ = append([]int{0}, l.Groups[g].Occ...)
	default:
		l.GroupOf[0] = add(CovGroup{Initial: true, Occ: []int{0}, FreeSD: freeSD, Corr: corr})
	}
	l.ShardStart = shardBounds(l.N)
	l.pathOcc, l.iccOcc, l.transOcc = l.occasionLists()
	l.Terms = activeTerms(l)
	l.CountAt = make([]int, T)
	for _, n := range pan.Len {
		l.MaxLen = max(l.MaxLen, n)
		for t := 0; t < n; t++ {
			l.CountAt[t]++
		}
	}
	return l
}

func meanSD(pan *model.Panel, j int) (float64, float64) {
	J := pan.J()
	var n, s, ss float64
	for c := j; c < len(pan.Y); c += J {
		if v := pan.Y[c]; !math.IsNaN(v) {
			n++
			s += v
			ss += v * v
		}
	}
	if n == 0 {
		return 0, 1
	}
	m := s / n
	v := ss/n - m*m
	if !(v > 1e-300) {
		return m, 1
	}
	return m, math.Sqrt(v)
}

// HasPaths reports whether the model has carry-over.
func (l *Layout) HasPaths() bool { return l.Lags != model.LagsNone }

// hasFreeCovariance reports whether any covariance group has a free
// standard deviation or correlation (with only categorical outcomes and no
// residual correlation, every Sigma_t is fixed at the identity).
func (l *Layout) hasFreeCovariance() bool {
	for _, g := range l.Groups {
		if g.Corr || slices.Contains(g.FreeSD, true) {
			return true
		}
	}
	return false
}

// occasionLists returns the occasions of the path parameters (1 when paths
// are equal over time, else 1..T-1), of the ICCs (-1: one per outcome,
// when paths are equal; else every occasion) and of the transition
// probabilities (-1: one set, when paths and means are equal; else 1..T-1).
func (l *Layout) occasionLists() (paths, icc, trans []int) {
	from := func(lo int) []int {
		out := make([]int, 0, max(l.T-lo, 0))
		for t := lo; t < l.T; t++ {
			out = append(out, t)
		}
		return out
	}
	paths, icc, trans = []int{1}, []int{-1}, []int{-1}
	if l.PathsFree {
		paths, icc = from(1), from(0)
	}
	if l.Growth || l.Dyn {
		// The between variance changes along the growth line, or with
		// the lagged latent response.
		icc = from(0)
	}
	if l.PathsFree || l.MeansFree || l.Growth || l.Dyn {
		trans = from(1)
	}
	return paths, icc, trans
}

// pathOccasions returns the occasions whose paths are parameters.
func (l *Layout) pathOccasions() []int { return l.pathOcc }

// iccOccasions returns the occasions of the ICCs (-1: one per outcome).
func (l *Layout) iccOccasions() []int { return l.iccOcc }

// transitionOccasions returns the occasions of the transition
// probabilities (-1: one set).
func (l *Layout) transitionOccasions() []int { return l.transOcc }
