package sampler

import (
	"fmt"
	"github.com/lagstar/lagstar/catalog"
	"math"
	"math/rand/v2"

	"github.com/lagstar/lagstar/internal/dense"
	"github.com/lagstar/lagstar/priors"
)

// pathTerm is the carry-over (autoregression) and cross-lag paths of the
// within-person parts: State.A, one J x J block per occasion t >= 1
// (w_t = A_t w_{t-1} + zeta_t), free where Layout.PathFree says, equal
// over time unless paths are free. Reported on the outcomes' own scales;
// derived: the within-person standardized paths.
type pathTerm struct{}

func (pathTerm) Name() string { return "carry-over and cross-lag paths" }

func (pathTerm) Active(l *Layout) bool { return l.HasPaths() && l.T > 1 }

// pathParams lists the paths of the given kinds (autoregression and
// crosslag, or their std_ forms) in State.A order.
func pathParams(l *Layout, prefix string) []Param {
	var ps []Param
	names := l.outcomeNames()
	ar, cl := prefix+"autoregression", prefix+"crosslag"
	if l.Dyn {
		// The carry-over of the latent response itself (term_dynamic.go).
		ar, cl = prefix+"latent_autoregression", prefix+"latent_crosslag"
	}
	for _, t := range l.pathOccasions() {
		suffix := ""
		var o *int
		if l.PathsFree {
			o = l.occasion(t)
			suffix = fmt.Sprintf(",t=%d", *o)
		}
		for r := 0; r < l.J; r++ {
			for c := 0; c < l.J; c++ {
				if !l.PathFree[r*l.J+c] {
					continue
				}
				if r == c {
					ps = append(ps, Param{Name: fmt.Sprintf("%s[%s%s]", ar, names[r], suffix), Kind: ar, Outcome: names[r], Occasion: o})
				} else {
					ps = append(ps, Param{Name: fmt.Sprintf("%s[%s->%s%s]", cl, names[c], names[r], suffix), Kind: cl, Outcome: names[r], From: names[c], Occasion: o})
				}
			}
		}
	}
	return ps
}

func (pathTerm) Params(l *Layout) []Param { return pathParams(l, "") }

func (pathTerm) Extract(s *State, dst []float64) []float64 {
	l := s.L
	J := l.J
	JJ := J * J
	for _, t := range l.pathOccasions() {
		for r := 0; r < J; r++ {
			for c := 0; c < J; c++ {
				if l.PathFree[r*J+c] {
					dst = append(dst, s.A[t*JJ+r*J+c]*l.Scale[r]/l.Scale[c])
				}
			}
		}
	}
	return dst
}

func (pathTerm) Inject(s *State, v []float64) []float64 {
	l := s.L
	J := l.J
	a := make([]float64, J*J)
	for _, t := range l.pathOccasions() {
		for r := 0; r < J; r++ {
			for c := 0; c < J; c++ {
				if l.PathFree[r*J+c] {
					a[r*J+c] = v[0] * l.Scale[c] / l.Scale[r]
					v = v[1:]
				}
			}
		}
		s.setPaths(t, a)
	}
	return v
}

// Start: free paths uniform on (-0.1, 0.1) at every occasion, then, with
// paths equal over time, occasion 1's copied to the others.
func (pathTerm) Start(s *State, rng *rand.Rand) {
	l := s.L
	J, T := l.J, l.T
	for t := 1; t < T; t++ {
		for r := 0; r < J; r++ {
			for c := 0; c < J; c++ {
				if l.PathFree[r*J+c] {
					s.A[(t*J+r)*J+c] = 0.2 * (rng.Float64() - 0.5)
				}
			}
		}
	}
	if !l.PathsFree {
		for t := 2; t < T; t++ {
			copy(s.A[t*J*J:(t+1)*J*J], s.A[J*J:2*J*J])
		}
	}
}

// Prior draws the free paths from their normal prior (priors.Set.PathSD),
// redrawn until stable under a stationary start.
func (pathTerm) Prior(s *State, pr priors.Set, rng *rand.Rand) {
	l := s.L
	J, T := l.J, l.T
	JJ := J * J
	work := make([]float64, 6*JJ)
	for {
		for t := 1; t < T; t++ {
			if !l.PathsFree && t > 1 {
				copy(s.A[t*JJ:(t+1)*JJ], s.A[JJ:2*JJ])
				continue
			}
			for k, free := range l.PathFree {
				if free {
					s.A[t*JJ+k] = pr.PathSD * rng.NormFloat64()
				}
			}
		}
		if l.GroupOf[0] != -1 || dense.SpectralRadiusBelowOne(s.A[JJ:2*JJ], J, work) {
			return
		}
	}
}

func (pathTerm) Blocks(l *Layout, _ Options) []Placed {
	if l.MA {
		return nil // the moving-average term's block draws the paths too
	}
	if l.Dyn {
		ps := []Placed{{slotPaths, NewLagPathBlock(l)}} // dynamic.go
		if l.RI {
			ps = append(ps, Placed{slotShear, NewLagShearBlock(l)})
		}
		return ps
	}
	return []Placed{{slotPaths, NewPathBlock(l)}}
}

func (pathTerm) DerivedParams(l *Layout) []Param { return pathParams(l, "std_") }

// ExtractDerived: the within-person standardized path A[r,c] *
// sqrt(V_prev[c,c] / V[r,r]); with paths equal over time V is the
// stationary variance when the carry-over is stable (DerivedWork.refV).
func (pathTerm) ExtractDerived(s *State, dw *DerivedWork, dst []float64) []float64 {
	l := s.L
	J := l.J
	JJ := J * J
	for _, t := range l.pathOccasions() {
		cur, prev := dw.refV, dw.refV
		if l.PathsFree {
			cur, prev = dw.v[t*JJ:(t+1)*JJ], dw.v[(t-1)*JJ:t*JJ]
		}
		for r := 0; r < J; r++ {
			for c := 0; c < J; c++ {
				if l.PathFree[r*J+c] {
					dst = append(dst, s.A[t*JJ+r*J+c]*math.Sqrt(prev[c*J+c]/cur[r*J+r]))
				}
			}
		}
	}
	return dst
}

// setPaths writes the J x J block a into A at every occasion it applies to.
func (s *State) setPaths(t int, a []float64) {
	JJ := s.L.J * s.L.J
	if s.L.PathsFree {
		copy(s.A[t*JJ:(t+1)*JJ], a)
		return
	}
	for u := 1; u < s.L.T; u++ {
		copy(s.A[u*JJ:(u+1)*JJ], a)
	}
}

func init() {
	catalog.Register(
		catalog.Kind{Name: "autoregression", Section: catalog.Within, Tabled: true, Manuscript: "Within persons", Standardized: "std_autoregression",
			Label: func(n catalog.Names) string { return n.Outcome + ", carry-over" + n.At() }},
		catalog.Kind{Name: "crosslag", Section: catalog.Within, Tabled: true, Manuscript: "Within persons", Standardized: "std_crosslag",
			Label: func(n catalog.Names) string { return n.From + " → " + n.Outcome + ", cross-lag" + n.At() }},
		catalog.Kind{Name: "std_autoregression", Section: catalog.Derived, Tabled: true},
		catalog.Kind{Name: "std_crosslag", Section: catalog.Derived, Tabled: true},
	)
}
