package sampler

import (
	"math"
	"math/rand/v2"

	"github.com/lagstar/lagstar/internal/dense"
)

// InterweaveBlock is the ancillary half of an ancillarity-sufficiency
// interweaving strategy (Yu & Meng 2011, JCGS 20:531) for the
// random-intercept scales. The sweep's PsiBlock draws Psi given the
// intercepts b (the sufficient, centred parameterization); this block then
// writes b_i = D eta_i with Psi = D C D (D the diagonal of sds, C the
// correlation matrix), holds eta and C fixed and draws D from its full
// conditional in that non-centred parameterization, where the scales
// enter the within paths directly:
//
//	p(d | eta, C, y*, rest) ∝ exp(-1/2 d'P d + h'd) prod_j d_j^-(nu+1) exp(-s (C^-1)_jj / (2 d_j^2)),
//
// the Gaussian part from the within paths w_it = y*_it - nu_t - d ∘ eta_i
// (P and h are sums over persons and occasions of the innovations'
// quadratic forms, linear in d), the rest the inverse-Wishart(nu, s I)
// prior of Psi written in (d, C) with its Jacobian 2^J prod_j d_j^J.
// Each d_j is drawn in turn by slice sampling on log d_j (Neal 2003,
// Ann. Statist. 31:705, stepping out and shrinkage), which leaves the
// conditional exactly invariant. Reads Ystar, Nu, A, SigInv, B, Psi;
// writes B and Psi.
type InterweaveBlock struct {
	d, c, cinv, eta []float64
	m               []float64 // T blocks: (I - A_t)' SigInv_t (I - A_t); block 0 SigInv_0
	cum             []float64 // T blocks: m summed over occasions 0..t
	p, h            []float64 // the Gaussian part in d
	// per shard: partial P and h, and scratch
	pp, ph, w, g [][]float64
	tmp          []float64
}

// NewInterweaveBlock allocates the block's workspace.
func NewInterweaveBlock(l *Layout) *InterweaveBlock {
	J, T := l.J, l.T
	JJ := J * J
	return &InterweaveBlock{d: make([]float64, J), c: make([]float64, JJ), cinv: make([]float64, JJ), eta: make([]float64, J),
		m: make([]float64, T*JJ), cum: make([]float64, T*JJ), p: make([]float64, JJ), h: make([]float64, J),
		pp: shardBufs(l, JJ), ph: shardBufs(l, J), w: shardBufs(l, l.MaxLen*J), g: shardBufs(l, 2*J), tmp: make([]float64, 4*JJ)}
}

// Name implements Block.
func (*InterweaveBlock) Name() string { return "random-intercept scales (interweaving)" }

// Writes implements Block.
func (*InterweaveBlock) Writes() Part { return PartIntercepts | PartInterceptCov }

// Update implements Block.
func (ib *InterweaveBlock) Update(st *State, rng *rand.Rand) error {
	l := st.L
	J, T := l.J, l.T
	JJ := J * J
	for j := 0; j < J; j++ {
		ib.d[j] = math.Sqrt(st.Psi[j*J+j])
	}
	for a := 0; a < J; a++ {
		for b := 0; b < J; b++ {
			ib.c[a*J+b] = st.Psi[a*J+b] / (ib.d[a] * ib.d[b])
		}
	}
	if !dense.Inverse(ib.cinv, ib.c, J, ib.tmp[:JJ], ib.tmp[JJ:2*JJ]) {
		return errBlock(ib.Name(), "random-intercept correlation matrix is not positive definite")
	}
	// m_t = (I - A_t)' SigInv_t (I - A_t) for t >= 1, SigInv_0 at t = 0.
	ia, sm := ib.tmp[:JJ], ib.tmp[JJ:2*JJ]
	for t := 0; t < T; t++ {
		si := st.SigInv[t*JJ : (t+1)*JJ]
		mt := ib.m[t*JJ : (t+1)*JJ]
		if t == 0 {
			copy(mt, si)
		} else {
			for k := range ia {
				ia[k] = -st.A[t*JJ+k]
			}
			for j := 0; j < J; j++ {
				ia[j*J+j]++
			}
			dense.Mul(sm, si, ia, J, J, J)
			dense.MulTA(mt, ia, sm, J, J, J)
		}
		for k := 0; k < JJ; k++ {
			prev := 0.0
			if t > 0 {
				prev = ib.cum[(t-1)*JJ+k]
			}
			ib.cum[t*JJ+k] = prev + mt[k]
		}
	}
	if len(l.ShardStart) == 2 {
		ib.sums(st, 0, 0, l.N)
	} else {
		forShards(l, func(s, lo, hi int) { ib.sums(st, s, lo, hi) })
	}
	for k := range ib.p {
		ib.p[k] = 0
		for _, part := range ib.pp {
			ib.p[k] += part[k]
		}
	}
	for j := range ib.h {
		ib.h[j] = 0
		for _, part := range ib.ph {
			ib.h[j] += part[j]
		}
	}
	nu := float64(J) + l.Priors.RIDfExtra
	s := l.Priors.RIScale
	old := ib.eta // the old sds, kept to rescale b
	copy(old, ib.d)
	for j := 0; j < J; j++ {
		// log f(x) for d_j = x, the other d fixed.
		lin := ib.h[j]
		for k := 0; k < J; k++ {
			if k != j {
				lin -= ib.p[j*J+k] * ib.d[k]
			}
		}
		pjj, cjj := ib.p[j*J+j], ib.cinv[j*J+j]
		logf := func(u float64) float64 { // density of u = log d_j
			x := math.Exp(u)
			return -0.5*pjj*x*x + lin*x - (nu+1)*u - s*cjj/(2*x*x) + u
		}
		ib.d[j] = math.Exp(sliceDraw(rng, math.Log(ib.d[j]), logf, 0.5))
	}
	for j := 0; j < J; j++ {
		f := ib.d[j] / old[j]
		for i := 0; i < l.N; i++ {
			st.B[i*J+j] *= f
		}
	}
	for a := 0; a < J; a++ {
		for b := 0; b < J; b++ {
			st.Psi[a*J+b] = ib.d[a] * ib.c[a*J+b] * ib.d[b]
		}
	}
	return nil
}

// sums adds shard s's persons' terms of P and h: with eta_i = b_i / d and
// v_t = y*_t - nu_t, the innovations are a_t - B_t d with a_0 = v_0,
// B_0 = diag(eta), a_t = v_t - A_t v_t-1, B_t = (I - A_t) diag(eta); so P
// += diag(eta) (sum_t m_t) diag(eta) and h += diag(eta) sum_t (I - A_t)'
// SigInv_t a_t (SigInv_0 a_0 at t = 0).
func (ib *InterweaveBlock) sums(st *State, s, lo, hi int) {
	l := st.L
	J := l.J
	JJ := J * J
	pp, ph, v := ib.pp[s], ib.ph[s], ib.w[s]
	a, g := ib.g[s][:J], ib.g[s][J:]
	for k := range pp {
		pp[k] = 0
	}
	for k := range ph {
		ph[k] = 0
	}
	for i := lo; i < hi; i++ {
		off := l.Panel.Offset[i]
		n := l.Panel.Len[i]
		if n == 0 {
			continue
		}
		for t := 0; t < n; t++ {
			for j := 0; j < J; j++ {
				v[t*J+j] = st.Ystar[off+t*J+j] - st.Nu[t*J+j]
			}
		}
		// g = sum_t (I - A_t)' SigInv_t a_t, written as sum_t (SigInv_t a_t
		// - A_t' SigInv_t a_t).
		for j := range g {
			g[j] = 0
		}
		for t := 0; t < n; t++ {
			copy(a, v[t*J:t*J+J])
			if t > 0 {
				at := st.A[t*JJ : (t+1)*JJ]
				for r := 0; r < J; r++ {
					x := a[r]
					for c := 0; c < J; c++ {
						x -= at[r*J+c] * v[(t-1)*J+c]
					}
					a[r] = x
				}
			}
			si := st.SigInv[t*JJ : (t+1)*JJ]
			for r := 0; r < J; r++ {
				x := 0.0
				for c := 0; c < J; c++ {
					x += si[r*J+c] * a[c]
				}
				// x is (SigInv_t a_t)_r; spread it through (I - A_t)'.
				g[r] += x
				if t > 0 {
					for q := 0; q < J; q++ {
						g[q] -= st.A[t*JJ+r*J+q] * x
					}
				}
			}
		}
		b := st.B[i*J : i*J+J]
		cum := ib.cum[(n-1)*JJ : n*JJ]
		for q := 0; q < J; q++ {
			eq := b[q] / ib.d[q]
			ph[q] += eq * g[q]
			for r := 0; r < J; r++ {
				pp[q*J+r] += eq * cum[q*J+r] * b[r] / ib.d[r]
			}
		}
	}
}

// sliceDraw returns one slice-sampling update of x0 for the log density
// logf (Neal 2003): stepping out with width w, then shrinkage.
func sliceDraw(rng *rand.Rand, x0 float64, logf func(float64) float64, w float64) float64 {
	y := logf(x0) + math.Log(1-rng.Float64()) // log(U), U in (0, 1]
	lo := x0 - w*rng.Float64()
	hi := lo + w
	for k := 0; k < 100 && logf(lo) > y; k++ {
		lo -= w
	}
	for k := 0; k < 100 && logf(hi) > y; k++ {
		hi += w
	}
	for {
		x := lo + (hi-lo)*rng.Float64()
		if logf(x) > y {
			return x
		}
		if x < x0 {
			lo = x
		} else {
			hi = x
		}
	}
}
