package sampler

import (
	"math"
	"math/rand/v2"

	"github.com/lagstar/lagstar/internal/dense"
)

// PathBlock draws the free carry-over and cross-lag paths A_t from their
// normal full conditional, the multivariate regression of w_t on w_{t-1}:
// with S11 = sum w_{t-1} w_{t-1}' and S01 = sum w_t w_{t-1}', vec(A) has
// precision (S11 kron Sigma^{-1}) + I/sd^2 and linear term
// vec(Sigma^{-1} S01), restricted to the free entries. Under a stationary
// first occasion this draw is an independence proposal, accepted with the
// ratio of first-occasion densities N(w_1; 0, V(A')) / N(w_1; 0, V(A)) and
// rejected when A' is not stable. Reads Ystar, Nu, B, Sigma; writes A.
type PathBlock struct {
	free          []int // free entries r*J+c
	s11, s01, s00 []float64
	prec, h, a    []float64
	cur, old      []float64
	work          []float64
	Accepted      int
	Proposed      int
}

// NewPathBlock allocates the block's workspace.
func NewPathBlock(l *Layout) *PathBlock {
	J := l.J
	pb := &PathBlock{s11: make([]float64, l.T*J*J), s01: make([]float64, l.T*J*J), s00: make([]float64, J*J),
		cur: make([]float64, J*J), old: make([]float64, J*J),
		work: make([]float64, 8*J*J)}
	for k, f := range l.PathFree {
		if f {
			pb.free = append(pb.free, k)
		}
	}
	n := len(pb.free)
	pb.prec, pb.h, pb.a = make([]float64, n*n), make([]float64, n), make([]float64, n)
	return pb
}

// Name implements Block.
func (*PathBlock) Name() string { return "carry-over paths" }

// Update implements Block.
func (pb *PathBlock) Update(st *State, rng *rand.Rand) error {
	l := st.L
	J, T := l.J, l.T
	JJ := J * J
	st.ensureMoments()
	m := st.Mom
	copy(pb.s00, m.Stt[:JJ])
	copy(pb.s11, m.S11)
	copy(pb.s01, m.S01)
	if !l.PathsFree {
		// Equal paths: pool occasions 1..T-1 into slot 1.
		for t := 2; t < T; t++ {
			for k := 0; k < JJ; k++ {
				pb.s11[JJ+k] += m.S11[t*JJ+k]
				pb.s01[JJ+k] += m.S01[t*JJ+k]
			}
		}
	}
	last := T - 1
	if !l.PathsFree {
		last = min(1, T-1)
	}
	for t := 1; t <= last; t++ {
		if err := pb.draw(st, rng, t); err != nil {
			return err
		}
	}
	return nil
}

func (pb *PathBlock) draw(st *State, rng *rand.Rand, t int) error {
	l := st.L
	J := l.J
	JJ := J * J
	n := len(pb.free)
	si := st.SigInv[t*JJ : (t+1)*JJ]
	s11 := pb.s11[t*JJ : (t+1)*JJ]
	s01 := pb.s01[t*JJ : (t+1)*JJ]
	m := pb.work[:JJ]
	dense.Mul(m, si, s01, J, J, J) // Sigma^{-1} S01
	iv := 1 / (l.Priors.PathSD * l.Priors.PathSD)
	for p1, f1 := range pb.free {
		r1, c1 := f1/J, f1%J
		pb.h[p1] = m[r1*J+c1]
		for p2, f2 := range pb.free {
			r2, c2 := f2/J, f2%J
			pb.prec[p1*n+p2] = s11[c1*J+c2] * si[r1*J+r2]
		}
		pb.prec[p1*n+p1] += iv
	}
	if !dense.Cholesky(pb.prec, n) {
		return errBlock("carry-over paths", "conditional precision is not positive definite")
	}
	dense.SolveLower(pb.prec, n, pb.h)
	for k := range pb.h {
		pb.h[k] += rng.NormFloat64()
	}
	dense.SolveUpperT(pb.prec, n, pb.h)
	copy(pb.cur, st.A[t*JJ:(t+1)*JJ])
	for p, f := range pb.free {
		pb.cur[f] = pb.h[p]
	}
	if l.GroupOf[0] != -1 {
		st.setPaths(t, pb.cur)
		return st.Refresh()
	}
	// Stationary first occasion: independence Metropolis-Hastings.
	pb.Proposed++
	copy(pb.old, st.A[JJ:2*JJ])
	before := pb.initialLogLik(st)
	st.setPaths(t, pb.cur)
	if err := st.Refresh(); err == nil {
		after := pb.initialLogLik(st)
		if math.Log(rng.Float64()) < after-before {
			pb.Accepted++
			return nil
		}
	}
	st.setPaths(t, pb.old)
	return st.Refresh()
}

// initialLogLik is the log density of every person's first-occasion w under
// N(0, Sigma_1), up to a constant.
func (pb *PathBlock) initialLogLik(st *State) float64 {
	J := st.L.J
	return -0.5*float64(st.L.N)*st.LogDet[0] - 0.5*dense.TraceProd(st.SigInv[:J*J], pb.s00, J)
}
