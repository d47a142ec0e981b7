package sampler

import (
	"math"
	"testing"

	"github.com/lagstar/lagstar/internal/dense"
)

// exactCollapsed is log p(A, Psi | y*) up to a constant by brute force:
// each person's latent responses are normal with mean nu and covariance
// Psi (every pair of occasions) plus the within paths' covariance, built
// occasion by occasion from Sigma and A; plus the priors.
func exactCollapsed(st *State) float64 {
	l := st.L
	J, JJ := l.J, l.J*l.J
	total := 0.0
	for i := 0; i < l.N; i++ {
		Ti := l.Panel.Len[i]
		n := Ti * J
		V := make([][]float64, Ti) // Var(w_t)
		V[0] = append([]float64(nil), st.Sig[:JJ]...)
		tmp := make([]float64, JJ)
		for t := 1; t < Ti; t++ {
			V[t] = make([]float64, JJ)
			dense.Mul(tmp, st.A[t*JJ:(t+1)*JJ], V[t-1], J, J, J)
			dense.MulBT(V[t], tmp, st.A[t*JJ:(t+1)*JJ], J, J, J)
			for k := range V[t] {
				V[t][k] += st.Sig[t*JJ+k]
			}
		}
		S := make([]float64, n*n)
		for t := 0; t < Ti; t++ {
			c := append([]float64(nil), V[t]...)
			for u := t; u < Ti; u++ {
				if u > t {
					next := make([]float64, JJ)
					dense.Mul(next, st.A[u*JJ:(u+1)*JJ], c, J, J, J)
					c = next
				}
				for a := 0; a < J; a++ {
					for b := 0; b < J; b++ {
						v := c[a*J+b] + st.Psi[a*J+b]
						S[(u*J+a)*n+t*J+b] = v
						S[(t*J+b)*n+u*J+a] = v
					}
				}
			}
		}
		if !dense.Cholesky(S, n) {
			return math.NaN()
		}
		d := make([]float64, n)
		off := l.Panel.Offset[i]
		for c := range d {
			d[c] = st.Ystar[off+c] - st.Nu[c]
		}
		dense.SolveLower(S, n, d)
		q := 0.0
		for _, v := range d {
			q += v * v
		}
		total += -0.5*q - 0.5*dense.LogDetChol(S, n)
	}
	sd := l.Priors.PathSD
	for k, f := range l.PathFree {
		if f {
			total -= 0.5 * st.A[JJ+k] * st.A[JJ+k] / (sd * sd)
		}
	}
	chol := append([]float64(nil), st.Psi...)
	dense.Cholesky(chol, J)
	inv := make([]float64, JJ)
	dense.InverseFromChol(inv, chol, J, make([]float64, J))
	tr := 0.0
	for j := 0; j < J; j++ {
		tr += inv[j*J+j]
	}
	df0 := float64(J) + l.Priors.RIDfExtra
	return total - 0.5*(df0+float64(J)+1)*dense.LogDetChol(chol, J) - 0.5*l.Priors.RIScale*tr
}

// TestCollapsedTargetExact: differences of the collapsed block's target
// between parameter values equal those of the brute-force marginal, for a
// bivariate cross-lagged model (free first occasion) and a univariate one
// with a stationary start, with missing cells.
func TestCollapsedTargetExact(t *testing.T) {
	for _, p := range problems()[:2] {
		p.n, p.t = 30, 5
		p.tr.Missing = 0.2
		t.Run(p.name, func(t *testing.T) { collapsedTargetExact(t, p) })
	}
}

func collapsedTargetExact(t *testing.T, p problem) {
	l := p.layout(t)
	rng := newRand(4)
	st := NewState(l, rng)
	blocks := Blocks(l, "joint")
	for range 20 {
		if err := Sweep(st, blocks, rng); err != nil {
			t.Fatal(err)
		}
	}
	cb := NewCollapsedBlock(l)
	base, baseExact := cb.logTarget(st), exactCollapsed(st)
	J, JJ := l.J, l.J*l.J
	for k := 0; k < 3; k++ {
		blk := append([]float64(nil), st.A[JJ:2*JJ]...)
		for _, f := range cb.free {
			blk[f] += 0.1 * rng.NormFloat64()
		}
		st.setPaths(1, blk)
		for a := 0; a < J; a++ {
			for b := 0; b < J; b++ {
				st.Psi[a*J+b] *= 1 + 0.2*float64(k+1)*float64(1+a+b)/4
			}
		}
		if err := st.Refresh(); err != nil {
			t.Fatal(err)
		}
		got, want := cb.logTarget(st)-base, exactCollapsed(st)-baseExact
		if math.Abs(got-want) > 1e-8*(1+math.Abs(want)) {
			t.Errorf("change %d: collapsed target moved by %.10g, brute force by %.10g", k, got, want)
		}
	}
}
