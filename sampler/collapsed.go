package sampler

import (
	"math"
	"math/rand/v2"

	"github.com/lagstar/lagstar/internal/dense"
)

// CollapsedBlock moves the carry-over paths and the random-intercept
// covariance together with the random intercepts integrated out, one
// Metropolis-Hastings step per sweep on
//
//	p(A, Psi | y*, nu, Sigma) ∝ p(A) p(Psi) prod_i ∫ p(y*_i | b, A, ...) N(b; 0, Psi) db
//
// (a partially collapsed Gibbs step: van Dyk & Park 2008; Liu 1994); the
// random-intercept block that follows at once draws b from its full
// conditional given the new values. Given b, the paths and Psi are pinned
// down by the random intercepts, and a stable person difference and
// carry-over explain the same persistence, so one-at-a-time draws crawl
// along that ridge (binary panels over few waves, the Ohio reference);
// with b integrated out the move crosses it.
//
// Per person, with e_t = y*_t - nu_t, innovations r_1 = e_1 and
// r_t = e_t - A e_{t-1}, G_t = (I - A)' Sigma_t^{-1} (G_1 = Sigma_1^{-1}):
// log p = -1/2 sum r' Sigma^{-1} r + 1/2 h' M^{-1} h - 1/2 log|M|
// - 1/2 log|Psi| - 1/2 sum log|Sigma_t| + const, h = sum G_t r_t and
// M = Psi^{-1} + sum G_t (I - A) (the random-intercept block's precision).
//
// The proposal moves x = (free paths, log of D) jointly: Psi goes to
// D Psi D (D = diag(exp eps), keeping its correlations; Jacobian
// |D|^{J+1}) and the paths by a normal step. The steps are independent at
// first; from 100 warm-up sweeps on they follow the covariance of x over
// the warm-up so far (adaptive Metropolis, Haario, Saksman & Tamminen 2001),
// which points them along the ridge; their overall size adapts towards
// acceptance 0.25 during warm-up, and everything is frozen afterwards.
// Used for models of one outcome with random intercepts and carry-over
// equal over time (see blocksFor for why one outcome).
// Reads Ystar, Nu, Sigma; writes A and Psi.
type CollapsedBlock struct {
	ib           *InterceptBlock // its precisions M_T and G_t
	free         []int
	oldA, oldPsi []float64
	part         []float64 // per shard: partial sums
	lenTerm      []float64 // per path length T: -1/2 log|M_T| - 1/2 sum_{t<T} log|Sigma_t|
	work         []float64
	x, step      []float64 // current x; proposed step
	chol         []float64 // Cholesky factor of the proposal covariance
	// Adapted state (checkpointed): log of the overall step size, the
	// warm-up sums of x and x x', their count, tries and acceptances.
	logStep        float64
	sumX, sumXX    []float64
	seen           int
	Tries, Accepts int
}

// NewCollapsedBlock allocates the block's workspace.
func NewCollapsedBlock(l *Layout) *CollapsedBlock {
	J := l.J
	cb := &CollapsedBlock{ib: NewInterceptBlock(l), oldA: make([]float64, l.T*J*J), oldPsi: make([]float64, J*J),
		part: make([]float64, len(l.ShardStart)-1), lenTerm: make([]float64, l.T), work: make([]float64, 3*J*J+J)}
	for k, f := range l.PathFree {
		if f {
			cb.free = append(cb.free, k)
		}
	}
	d := len(cb.free) + J
	cb.x, cb.step, cb.chol = make([]float64, d), make([]float64, d), make([]float64, d*d)
	cb.sumX, cb.sumXX = make([]float64, d), make([]float64, d*d)
	cb.logStep = math.Log(0.1)
	return cb
}

// Name implements Block.
func (*CollapsedBlock) Name() string {
	return "paths and random-intercept covariance (intercepts integrated out)"
}

// logTarget returns log p(A, Psi | y*, ...) up to a constant, or -Inf.
func (cb *CollapsedBlock) logTarget(st *State) float64 {
	l := st.L
	J, JJ := l.J, l.J*l.J
	if err := cb.ib.prepare(st); err != nil {
		return math.Inf(-1)
	}
	// Priors: normal paths, inverse-Wishart Psi.
	lp := 0.0
	sd := l.Priors.PathSD
	for _, f := range cb.free {
		a := st.A[JJ+f]
		lp -= 0.5 * a * a / (sd * sd)
	}
	chol := cb.work[:JJ]
	copy(chol, st.Psi)
	if !dense.Cholesky(chol, J) {
		return math.Inf(-1)
	}
	logDetPsi := dense.LogDetChol(chol, J)
	df0 := float64(J) + l.Priors.RIDfExtra
	trace := 0.0
	for j := 0; j < J; j++ {
		trace += cb.ib.psiIn[j*J+j]
	}
	lp += -0.5*(df0+float64(J)+1)*logDetPsi - 0.5*l.Priors.RIScale*trace
	logDetSig := 0.0
	for t := range cb.lenTerm {
		logDetSig += st.LogDet[t]
		cb.lenTerm[t] = -0.5*dense.LogDetChol(cb.ib.chol[t*JJ:(t+1)*JJ], J) - 0.5*logDetSig
	}
	// Persons, in shards summed in order.
	if len(l.ShardStart) == 2 {
		cb.shard(st, 0, 0, l.N)
	} else {
		forShards(l, func(s, lo, hi int) { cb.shard(st, s, lo, hi) })
	}
	for _, v := range cb.part {
		lp += v
	}
	return lp - 0.5*float64(l.N)*logDetPsi
}

// shard adds the collapsed log likelihood of persons lo..hi-1 (without
// the log|Psi| term) into cb.part[s].
func (cb *CollapsedBlock) shard(st *State, s, lo, hi int) {
	l := st.L
	J := l.J
	JJ := J * J
	ib := cb.ib
	h := ib.h[s]
	total := 0.0
	for i := lo; i < hi; i++ {
		quad := ib.personSums(st, s, i, true)
		Ti := l.Panel.Len[i]
		dense.SolveLower(ib.chol[(Ti-1)*JJ:Ti*JJ], J, h)
		hm := 0.0
		for q := 0; q < J; q++ {
			hm += h[q] * h[q]
		}
		total += -0.5*quad + 0.5*hm + cb.lenTerm[Ti-1]
	}
	cb.part[s] = total
}

// Update implements Block.
func (cb *CollapsedBlock) Update(st *State, rng *rand.Rand) error {
	l := st.L
	J, JJ := l.J, l.J*l.J
	nf := len(cb.free)
	d := nf + J
	cur := cb.logTarget(st)
	if math.IsInf(cur, -1) || math.IsNaN(cur) {
		return errBlock(cb.Name(), "current values have zero density")
	}
	copy(cb.oldA, st.A)
	copy(cb.oldPsi, st.Psi)
	// x = (free paths, log sd of each random intercept).
	for p, f := range cb.free {
		cb.x[p] = st.A[JJ+f]
	}
	for j := 0; j < J; j++ {
		cb.x[nf+j] = 0.5 * math.Log(st.Psi[j*J+j])
	}
	if st.Warmup {
		cb.seen++
		for a := 0; a < d; a++ {
			cb.sumX[a] += cb.x[a]
			for b := 0; b < d; b++ {
				cb.sumXX[a*d+b] += cb.x[a] * cb.x[b]
			}
		}
	}
	// Proposal step: c L z, L the Cholesky factor of the warm-up
	// covariance of x (identity until there is enough of it).
	c := math.Exp(cb.logStep)
	for a := range cb.step {
		cb.step[a] = rng.NormFloat64()
	}
	if cb.seen >= 100 && cb.covariance() {
		dense.MulVec(cb.x, cb.chol, cb.step, d, d) // x is free again
		copy(cb.step, cb.x)
	}
	blk := cb.work[JJ : 2*JJ]
	copy(blk, st.A[JJ:2*JJ])
	for p, f := range cb.free {
		blk[f] += c * cb.step[p]
	}
	dd := cb.work[2*JJ : 2*JJ+J]
	logJac := 0.0
	for j := range dd {
		eps := c * cb.step[nf+j]
		dd[j] = math.Exp(eps)
		logJac += float64(J+1) * eps
	}
	for a := 0; a < J; a++ {
		for b := 0; b < J; b++ {
			st.Psi[a*J+b] = cb.oldPsi[a*J+b] * dd[a] * dd[b]
		}
	}
	st.setPaths(1, blk)
	accepted := false
	if err := st.Refresh(); err == nil {
		prop := cb.logTarget(st)
		accepted = math.Log(rng.Float64()) < prop+logJac-cur
	}
	cb.Tries++
	if accepted {
		cb.Accepts++
	} else {
		copy(st.A, cb.oldA)
		copy(st.Psi, cb.oldPsi)
		if err := st.Refresh(); err != nil {
			return err
		}
	}
	if st.Warmup {
		adapt(&cb.logStep, accepted, 0.25, cb.Tries)
	}
	return nil
}

// covariance sets chol to the Cholesky factor of the warm-up covariance
// of x (plus a small ridge) and reports whether it is positive definite.
// After warm-up the sums no longer change, so neither does the factor.
func (cb *CollapsedBlock) covariance() bool {
	d := len(cb.x)
	n := float64(cb.seen)
	for a := 0; a < d; a++ {
		for b := 0; b < d; b++ {
			v := cb.sumXX[a*d+b]/n - cb.sumX[a]/n*cb.sumX[b]/n
			if a == b {
				v += 1e-6
			}
			cb.chol[a*d+b] = v
		}
	}
	return dense.Cholesky(cb.chol, d)
}

// AdaptState implements Adaptive: the step size and the running moments
// of the adaptive proposal, with its counters.
func (cb *CollapsedBlock) AdaptState() []any {
	return []any{&cb.logStep, &cb.sumX, &cb.sumXX, &cb.seen, &cb.Tries, &cb.Accepts}
}
