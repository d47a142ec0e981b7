package sampler

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/lagstar/lagstar/internal/dense"
)

// Param describes one reported quantity (a parameter or a derived one).
// Fields that do not apply are empty (Occasion nil, Index 0).
type Param struct {
	Name    string
	Kind    string
	Outcome string
	From    string
	// Pair names the two outcomes of a correlation (Outcome is then empty).
	Pair     []string
	Occasion *int
	Index    int
}

func (l *Layout) outcomeNames() []string {
	n := make([]string, l.J)
	for j, o := range l.Panel.Outcomes {
		n[j] = o.Name
	}
	return n
}

// occasion returns grid occasion t's value (for Param.Occasion).
func (l *Layout) occasion(t int) *int { v := l.Panel.Occasions[t]; return &v }

// DerivedParams lists the derived quantities in the order ExtractDerived
// writes them: within-person standardized paths, latent intraclass
// correlations and category probabilities per occasion (each active
// term's, in registryEntry.derived order).
func (l *Layout) DerivedParams() []Param {
	var ps []Param
	for _, t := range derivedOrder(l) {
		ps = append(ps, t.DerivedParams(l)...)
	}
	return ps
}

// DerivedWork is scratch space for ExtractDerived: v holds the
// within-person variances V_t (T blocks of J x J) of the current state,
// refV the one reference variance used with paths equal over time.
type DerivedWork struct {
	v, tmp, ref, st []float64
	refV            []float64
	imp             []float64 // impulse responses (term_impulse.go)
	terms           []derivedTerm
}

// NewDerivedWork allocates scratch for ExtractDerived.
func NewDerivedWork(l *Layout) *DerivedWork {
	return &DerivedWork{v: make([]float64, l.T*l.J*l.J), tmp: make([]float64, l.J*l.J), ref: make([]float64, l.J*l.J),
		st: make([]float64, 7*l.J*l.J), imp: make([]float64, l.Horizon*(l.J+l.J*l.J)+2*l.J*l.J+l.J), terms: derivedOrder(l)}
}

// ExtractDerived writes the derived quantities of DerivedParams. The
// within-person variance V_t follows V_1 = Sigma_1, V_t = A_t V_{t-1} A_t' +
// Sigma_t; with paths equal over time the standardized paths and the ICC
// use the stationary variance when the carry-over is stable (else V at the
// last occasion).
func (s *State) ExtractDerived(dst []float64, dw *DerivedWork) []float64 {
	l := s.L
	J, T := l.J, l.T
	JJ := J * J
	dst = dst[:0]
	v := dw.v
	if l.MA {
		s.WithinCovariances(v, nil, dw.tmp)
		dw.refV = v[(T-1)*JJ : T*JJ]
		if !l.PathsFree && stationaryARMA(dw.ref, s.A[JJ:2*JJ], s.Sig[JJ:2*JJ], s.M[2*J:3*J], J, dw.st) {
			dw.refV = dw.ref
		}
		for _, t := range dw.terms {
			dst = t.ExtractDerived(s, dw, dst)
		}
		return dst
	}
	copy(v[:JJ], s.Sig[:JJ])
	for t := 1; t < T; t++ {
		dense.Mul(dw.tmp, s.A[t*JJ:(t+1)*JJ], v[(t-1)*JJ:t*JJ], J, J, J)
		dense.MulBT(v[t*JJ:(t+1)*JJ], dw.tmp, s.A[t*JJ:(t+1)*JJ], J, J, J)
		for k := 0; k < JJ; k++ {
			v[t*JJ+k] += s.Sig[t*JJ+k]
		}
	}
	dw.refV = v[(T-1)*JJ : T*JJ]
	if !l.PathsFree && T > 1 {
		if stationaryCov(dw.ref, s.A[JJ:2*JJ], s.Sig[JJ:2*JJ], J, dw.st) {
			dw.refV = dw.ref
		}
	}
	for _, t := range dw.terms {
		dst = t.ExtractDerived(s, dw, dst)
	}
	return dst
}

// Inject sets the state's parameters from a vector in the order and on the
// scales of Extract (the inverse of Extract), then refreshes the caches.
// Latent responses and random intercepts are left as they are.
func (s *State) Inject(v []float64) error {
	l := s.L
	if want := len(l.Params()); len(v) != want {
		return fmt.Errorf("sampler: %d values for %d parameters", len(v), want)
	}
	for _, t := range l.Terms {
		v = t.Inject(s, v)
	}
	return s.Refresh()
}

// Replicate draws a new data set on the panel's pattern (the same persons,
// occasions and missing cells) from the state's parameters, with new random
// intercepts and within paths: y* = nu + b + w, cut at the thresholds. It
// writes categories, or continuous values on the analysis scale, into dst
// (NaN where the data are missing). rng is used by one goroutine at a time.
func (s *State) Replicate(dst []float64, rng *rand.Rand) {
	s.ReplicateLatent(dst, nil, nil, rng)
}

// ReplicateLatent is Replicate that also keeps the latent responses of every
// cell (missing ones included) in ystar and the random intercepts in b, when
// those are not nil: a draw from p(y, y*, b | parameters).
func (s *State) ReplicateLatent(dst, ystar, b []float64, rng *rand.Rand) {
	s.ReplicateFactors(dst, ystar, b, nil, rng)
}

// ReplicateFactors is ReplicateLatent that under growth also keeps the
// random slopes in slopes (N x J), when not nil.
func (s *State) ReplicateFactors(dst, ystar, b, slopes []float64, rng *rand.Rand) {
	l := s.L
	J := l.J
	g, err := s.Generator()
	if err != nil {
		panic("sampler: replicate from a state whose caches are not current: " + err.Error())
	}
	bi := make([]float64, J)
	for i := 0; i < l.N; i++ {
		off := l.Panel.Offset[i]
		g.Person(l.Panel.Len[i], rng, bi, func(t, j int, y float64) {
			c := off + t*J + j
			if ystar != nil {
				ystar[c] = y
			}
			switch {
			case s.Y[c] != s.Y[c]:
				dst[c] = math.NaN()
			case !l.Cat[j]:
				dst[c] = y
			default:
				dst[c] = float64(g.Category(j, y))
			}
		})
		if b != nil {
			copy(b[i*J:i*J+J], bi)
		}
		if slopes != nil && g.Time != nil {
			copy(slopes[i*J:i*J+J], g.f[J:])
		}
	}
}
