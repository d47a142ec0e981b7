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
// first occasion the full conditional also has the factor N(w_1; 0, V(A))
// (V the stationary covariance), and two Metropolis-Hastings moves leave it
// invariant in turn: an independence proposal from the normal part,
// accepted with the ratio of first-occasion densities, which jumps far
// when that factor is weak; and a random walk A' = A + c L^{-T} z scaled by
// the normal part's covariance (L its Cholesky factor; c adapted during
// warm-up towards acceptance 0.3, Roberts, Gelman & Gilks 1997), accepted
// with the ratio of full conditionals. When the carry-over is near 1 the
// first-occasion factor rejects every far jump, and the random walk lets A
// and the latent paths move together. Proposals that are not stable are
// rejected. Reads Ystar, Nu, B, Sigma; writes A.
type PathBlock struct {
	free          []int // free entries r*J+c
	s11, s01, s00 []float64
	prec, h, a    []float64
	mean, d       []float64
	cur, old      []float64
	work          []float64
	Accepted      int
	Proposed      int
	// Random-walk move under a stationary first occasion: log of c, tries
	// and acceptances.
	logStep       float64
	Tries, Walked int
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
	pb.mean, pb.d = make([]float64, n), make([]float64, n)
	pb.logStep = math.Log(2.38 / math.Sqrt(float64(max(n, 1))))
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
	stationary := l.GroupOf[0] == -1
	if stationary {
		copy(pb.mean, pb.h)
		dense.SolveUpperT(pb.prec, n, pb.mean)
	}
	for k := range pb.h {
		pb.h[k] += rng.NormFloat64()
	}
	dense.SolveUpperT(pb.prec, n, pb.h)
	copy(pb.cur, st.A[t*JJ:(t+1)*JJ])
	for p, f := range pb.free {
		pb.cur[f] = pb.h[p]
	}
	if !stationary {
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
			before = after
			copy(pb.old, pb.cur)
		}
	}
	// Random walk on the full conditional.
	for p := range pb.d {
		pb.d[p] = rng.NormFloat64()
	}
	dense.SolveUpperT(pb.prec, n, pb.d)
	c := math.Exp(pb.logStep)
	copy(pb.cur, pb.old)
	for p, f := range pb.free {
		pb.cur[f] = pb.old[f] + c*pb.d[p]
	}
	logBefore := before - 0.5*pb.normalQuad(pb.old)
	accepted := false
	st.setPaths(t, pb.cur)
	if err := st.Refresh(); err == nil {
		if math.Log(rng.Float64()) < pb.initialLogLik(st)-0.5*pb.normalQuad(pb.cur)-logBefore {
			accepted = true
			copy(pb.old, pb.cur)
		}
	}
	pb.Tries++
	if accepted {
		pb.Walked++
	}
	if st.Warmup {
		adapt(&pb.logStep, accepted, 0.3, pb.Tries)
	}
	st.setPaths(t, pb.old)
	return st.Refresh()
}

// normalQuad returns ||L'(a - mean)||^2 for the free entries of the J x J
// block a: minus twice the log of the normal part of the conditional, up to
// a constant (L, the Cholesky factor of its precision, is in pb.prec).
func (pb *PathBlock) normalQuad(a []float64) float64 {
	n := len(pb.free)
	q := 0.0
	for i := 0; i < n; i++ {
		v := 0.0
		for k := i; k < n; k++ {
			v += pb.prec[k*n+i] * (a[pb.free[k]] - pb.mean[k])
		}
		q += v * v
	}
	return q
}

// initialLogLik is the log density of every person's first-occasion w under
// N(0, Sigma_1), up to a constant.
func (pb *PathBlock) initialLogLik(st *State) float64 {
	J := st.L.J
	return -0.5*float64(st.L.N)*st.LogDet[0] - 0.5*dense.TraceProd(st.SigInv[:J*J], pb.s00, J)
}

// AdaptState implements Adaptive: acceptance counters, the adapted step
// size and the walk's counters.
func (pb *PathBlock) AdaptState() []any {
	return []any{&pb.Accepted, &pb.Proposed, &pb.logStep, &pb.Tries, &pb.Walked}
}
