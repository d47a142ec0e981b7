package sampler

import (
	"fmt"
	"github.com/lagstar/lagstar/catalog"
	"math"
	"math/rand/v2"

	"github.com/lagstar/lagstar/internal/dense"
	"github.com/lagstar/lagstar/priors"
)

// The covariances of the within-person parts are Layout.Groups: each group
// a covariance D R D (State.SD[g], State.R[g]; sds fixed at 1 for
// categorical outcomes) shared by its occasions. Two terms report them:
// innovationTerm the innovation covariances (groups of occasions t >= 1,
// and of a first occasion drawn from the innovation distribution itself)
// and firstOccasionTerm the free first-occasion covariance. One block,
// CovBlock, updates every group; the innovation term adds it.

// innovationTerm is the innovation covariances Sigma_t, t >= 1.
type innovationTerm struct{}

// firstOccasionTerm is the first occasion's free covariance (absent under
// a stationary start, where it follows from the paths).
type firstOccasionTerm struct{}

func (innovationTerm) Name() string    { return "innovation covariances" }
func (firstOccasionTerm) Name() string { return "first-occasion covariance" }

func (innovationTerm) Active(l *Layout) bool    { return hasGroups(l, false) }
func (firstOccasionTerm) Active(l *Layout) bool { return hasGroups(l, true) }

func hasGroups(l *Layout, initial bool) bool {
	for _, g := range l.Groups {
		if g.Initial == initial {
			return true
		}
	}
	return false
}

// eachGroup calls fn for the groups that are (initial true) or are not
// the first occasion's, in Layout.Groups order.
func eachGroup(l *Layout, initial bool, fn func(g int, grp CovGroup)) {
	for g, grp := range l.Groups {
		if grp.Initial == initial {
			fn(g, grp)
		}
	}
}

func groupParams(l *Layout, initial bool) []Param {
	var ps []Param
	names := l.outcomeNames()
	eachGroup(l, initial, func(_ int, g CovGroup) {
		kindV, kindC := "innovation_variance", "innovation_correlation"
		suffix := ""
		var o *int
		if g.Initial {
			kindV, kindC = "initial_variance", "initial_correlation"
		} else if l.PathsFree {
			o = l.occasion(g.Occ[0])
			suffix = fmt.Sprintf(",t=%d", *o)
		}
		for j := 0; j < l.J; j++ {
			if g.FreeSD[j] {
				ps = append(ps, Param{Name: fmt.Sprintf("%s[%s%s]", kindV, names[j], suffix), Kind: kindV, Outcome: names[j], Occasion: o})
			}
		}
		if g.Corr {
			for a := 0; a < l.J; a++ {
				for b := a + 1; b < l.J; b++ {
					ps = append(ps, Param{Name: fmt.Sprintf("%s[%s,%s%s]", kindC, names[a], names[b], suffix), Kind: kindC, Pair: []string{names[a], names[b]}, Occasion: o})
				}
			}
		}
	})
	return ps
}

// groupExtract writes each group's free variances (outcomes' own scales)
// and correlations.
func groupExtract(s *State, initial bool, dst []float64) []float64 {
	l := s.L
	J := l.J
	eachGroup(l, initial, func(g int, grp CovGroup) {
		for j := 0; j < J; j++ {
			if grp.FreeSD[j] {
				v := s.SD[g][j] * l.Scale[j]
				dst = append(dst, v*v)
			}
		}
		if grp.Corr {
			for a := 0; a < J; a++ {
				for b := a + 1; b < J; b++ {
					dst = append(dst, s.R[g][a*J+b])
				}
			}
		}
	})
	return dst
}

func groupInject(s *State, initial bool, v []float64) []float64 {
	l := s.L
	J := l.J
	eachGroup(l, initial, func(g int, grp CovGroup) {
		for j := 0; j < J; j++ {
			if grp.FreeSD[j] {
				s.SD[g][j] = math.Sqrt(v[0]) / l.Scale[j]
				v = v[1:]
			}
		}
		if grp.Corr {
			for a := 0; a < J; a++ {
				for b := a + 1; b < J; b++ {
					s.R[g][a*J+b], s.R[g][b*J+a] = v[0], v[0]
					v = v[1:]
				}
			}
		}
	})
	return v
}

// groupStart: free sds uniform on (0.6, 0.9), correlations 0.
func groupStart(s *State, initial bool, rng *rand.Rand) {
	eachGroup(s.L, initial, func(g int, grp CovGroup) {
		for j := range grp.FreeSD {
			if grp.FreeSD[j] {
				s.SD[g][j] = 0.6 + 0.3*rng.Float64()
			}
		}
	})
}

// groupPrior draws free variances from their inverse-gamma prior and
// correlation matrices uniformly over the positive-definite ones.
func groupPrior(s *State, initial bool, pr priors.Set, rng *rand.Rand) {
	J := s.L.J
	eachGroup(s.L, initial, func(g int, grp CovGroup) {
		for j := 0; j < J; j++ {
			if grp.FreeSD[j] {
				s.SD[g][j] = math.Sqrt(pr.VarScale / priors.Gamma(rng, pr.VarShape))
			}
		}
		if grp.Corr {
			uniformCorrelation(s.R[g], J, rng)
		}
	})
}

// uniformCorrelation draws a correlation matrix uniformly over the
// positive-definite ones by rejection from uniform off-diagonals.
func uniformCorrelation(r []float64, J int, rng *rand.Rand) {
	c := make([]float64, J*J)
	for {
		dense.Identity(r, J)
		for a := 0; a < J; a++ {
			for b := a + 1; b < J; b++ {
				v := 2*rng.Float64() - 1
				r[a*J+b], r[b*J+a] = v, v
			}
		}
		copy(c, r)
		if dense.Cholesky(c, J) {
			return
		}
	}
}

func (innovationTerm) Params(l *Layout) []Param    { return groupParams(l, false) }
func (firstOccasionTerm) Params(l *Layout) []Param { return groupParams(l, true) }

func (innovationTerm) Extract(s *State, dst []float64) []float64 {
	return groupExtract(s, false, dst)
}
func (firstOccasionTerm) Extract(s *State, dst []float64) []float64 {
	return groupExtract(s, true, dst)
}

func (innovationTerm) Inject(s *State, v []float64) []float64    { return groupInject(s, false, v) }
func (firstOccasionTerm) Inject(s *State, v []float64) []float64 { return groupInject(s, true, v) }

func (innovationTerm) Start(s *State, rng *rand.Rand)    { groupStart(s, false, rng) }
func (firstOccasionTerm) Start(s *State, rng *rand.Rand) { groupStart(s, true, rng) }

func (innovationTerm) Prior(s *State, pr priors.Set, rng *rand.Rand) {
	groupPrior(s, false, pr, rng)
}
func (firstOccasionTerm) Prior(s *State, pr priors.Set, rng *rand.Rand) {
	groupPrior(s, true, pr, rng)
}

// Blocks: CovBlock updates every group with a free sd or correlation,
// the first occasion's included (with only categorical outcomes and no
// residual correlation every Sigma_t is the identity and there is none).
func (innovationTerm) Blocks(l *Layout, _ Options) []Placed {
	if !l.hasFreeCovariance() {
		return nil
	}
	return []Placed{{slotCov, NewCovBlock(l)}}
}

// Blocks: the innovation term's CovBlock updates the first occasion's
// group too; only a panel of one occasion (no innovations) needs it here.
func (firstOccasionTerm) Blocks(l *Layout, _ Options) []Placed {
	if hasGroups(l, false) || !l.hasFreeCovariance() {
		return nil
	}
	return []Placed{{slotCov, NewCovBlock(l)}}
}

func init() {
	catalog.Register(
		catalog.Kind{Name: "innovation_variance", Section: catalog.Within, Tabled: true, Manuscript: "Within persons",
			Label: func(n catalog.Names) string { return n.Outcome + ", innovation variance" + n.At() }},
		catalog.Kind{Name: "innovation_correlation", Section: catalog.Within, Tabled: true, Manuscript: "Within persons",
			Label: func(n catalog.Names) string { return n.PairLabel() + ", residual correlation" + n.At() }},
		catalog.Kind{Name: "initial_variance", Section: catalog.Within, Tabled: true, FirstOccasion: true},
		catalog.Kind{Name: "initial_correlation", Section: catalog.Within, Tabled: true, FirstOccasion: true},
	)
}
