package sampler

import (
	"math"
	"math/rand/v2"

	"github.com/lagstar/lagstar/internal/dense"
	"github.com/lagstar/lagstar/latentresp"
)

// LatentBlock draws every latent response y*_ijt of a categorical or missing
// cell from its full conditional: a normal with precision and mean taken
// from the block-tridiagonal precision of the person's VAR(1) path,
// truncated to the observed category's threshold interval (Albert & Chib
// 1993). Missing cells are drawn without truncation (missing at random).
// Reads B, Nu, Tau and the precision caches; writes Ystar.
type LatentBlock struct {
	// Per shard: path scratch, J x J scratch and partial sums of WQuad.
	w, v, sv, wq [][]float64
	// bt: per shard, a person's between parts S_t b_i under a lagged
	// latent response (term_dynamic.go).
	bt [][]float64
	// record, when set (benchmarks only), receives every standardized
	// truncation interval drawn from.
	record func(a, b float64)
}

// NewLatentBlock allocates the block's workspace.
func NewLatentBlock(l *Layout) *LatentBlock {
	JJ := l.J * l.J
	lb := &LatentBlock{w: shardBufs(l, l.MaxLen*l.J), v: shardBufs(l, JJ), sv: shardBufs(l, JJ), wq: shardBufs(l, JJ)}
	if l.Dyn {
		lb.bt = shardBufs(l, l.MaxLen*l.J)
	}
	return lb
}

// Name implements Block.
func (*LatentBlock) Name() string { return "latent responses" }

// Update implements Block. Persons are updated shard by shard, each shard
// with its own random stream (shard.go).
func (lb *LatentBlock) Update(st *State, _ *rand.Rand) error {
	l := st.L
	if len(l.ShardStart) == 2 {
		lb.updateShard(st, 0, 0, l.N)
	} else {
		forShards(l, func(s, lo, hi int) { lb.updateShard(st, s, lo, hi) })
	}
	for k := range st.WQuad {
		st.WQuad[k] = 0
		for _, part := range lb.wq {
			st.WQuad[k] += part[k]
		}
	}
	symmetrize(st.WQuad, l.J)
	st.WQuadOK = true
	return nil
}

// updateShard draws the latent responses of persons lo..hi-1.
func (lb *LatentBlock) updateShard(st *State, s, lo, hi int) {
	l := st.L
	J := l.J
	JJ := J * J
	w, rng, wq := lb.w[s], st.ShardRng[s], lb.wq[s]
	for k := range wq {
		wq[k] = 0
	}
	if J == 1 && l.Cat[0] && !l.Dyn {
		lb.updateShard1(st, s, lo, hi)
		return
	}
	for i := lo; i < hi; i++ {
		off := l.Panel.Offset[i]
		Ti := l.Panel.Len[i]
		st.fillW(w, i, st.Ystar)
		b := st.B[i*J : i*J+J]
		var g []float64 // growth: the slopes
		if st.G != nil {
			g = st.G[i*J : i*J+J]
		}
		var bt []float64 // lagged latent response: the between parts
		if l.Dyn {
			bt = lb.bt[s]
			for t := 0; t < Ti; t++ {
				for j := 0; j < J; j++ {
					bt[t*J+j] = st.between(i, t, j)
				}
			}
		}
		for t := 0; t < Ti; t++ {
			d := st.DMid[t*JJ : (t+1)*JJ]
			sds, invs := st.MidSD[t*J:(t+1)*J], st.MidInv[t*J:(t+1)*J]
			if t == Ti-1 {
				d = st.SigInv[t*JJ : (t+1)*JJ]
				sds, invs = st.LastSD[t*J:(t+1)*J], st.LastInv[t*J:(t+1)*J]
			}
			var lt, ln []float64
			if t > 0 {
				lt = st.LBlk[t*JJ : (t+1)*JJ]
			}
			if t+1 < Ti {
				ln = st.LBlk[(t+1)*JJ : (t+2)*JJ]
			}
			wt := w[t*J : (t+1)*J]
			for j := 0; j < J; j++ {
				c := off + t*J + j
				y := st.Y[c]
				miss := y != y // NaN
				if !miss && !l.Cat[j] {
					continue
				}
				acc := 0.0
				for k, dk := range d[j*J : (j+1)*J] {
					if k != j {
						acc += dk * wt[k]
					}
				}
				if lt != nil {
					wp := w[(t-1)*J : t*J]
					for k, x := range lt[j*J : (j+1)*J] {
						acc += x * wp[k]
					}
				}
				if ln != nil {
					wn := w[(t+1)*J : (t+2)*J]
					for k := 0; k < J; k++ {
						acc += ln[k*J+j] * wn[k]
					}
				}
				mean := -acc * invs[j]
				sd := sds[j]
				if miss {
					wt[j] = mean + sd*rng.NormFloat64()
					continue
				}
				shift := st.Nu[t*J+j] + b[j] + mean
				if g != nil {
					shift += l.Time[t] * g[j]
				}
				if bt != nil {
					shift = st.Nu[t*J+j] + bt[t*J+j] + mean
				}
				tau := st.Tau[j]
				k := int(y)
				lo, hi := math.Inf(-1), math.Inf(1)
				if k > 0 {
					lo = tau[k-1] - shift
				}
				if k < len(tau) {
					hi = tau[k] - shift
				}
				isd := 1 / sd
				if lb.record != nil {
					lb.record(lo*isd, hi*isd)
				}
				wt[j] = mean + sd*latentresp.TruncStdNormal(rng, lo*isd, hi*isd)
			}
		}
		for t := 0; t < Ti; t++ {
			c := t * J
			for j, bj := range b {
				st.Ystar[off+c+j] = w[c+j] + st.Nu[c+j] + bj
			}
			if bt != nil {
				for j := range b {
					st.Ystar[off+c+j] = w[c+j] + st.Nu[c+j] + bt[c+j]
				}
			}
			if g != nil {
				for j, gj := range g {
					st.Ystar[off+c+j] += l.Time[t] * gj
				}
			}
		}
		accumulateWQuad(st, wq, w, Ti, lb.v[s], lb.sv[s])
	}
}

// updateShard1 is updateShard for one categorical outcome: the same
// conditional, with the J x J blocks reduced to scalars.
func (lb *LatentBlock) updateShard1(st *State, s, lo, hi int) {
	l := st.L
	w, rng := lb.w[s], st.ShardRng[s]
	tau := st.Tau[0]
	nt := len(tau)
	quad := 0.0
	for i := lo; i < hi; i++ {
		off := l.Panel.Offset[i]
		Ti := l.Panel.Len[i]
		b := st.B[i]
		ys := st.Ystar[off : off+Ti]
		y := st.Y[off : off+Ti]
		nu := st.Nu[:Ti]
		w := w[:Ti]
		var g float64 // growth: the slope
		if st.G != nil {
			g = st.G[i]
			for t := range w {
				w[t] = ys[t] - nu[t] - b - l.Time[t]*g
			}
		} else {
			for t := range w {
				w[t] = ys[t] - nu[t] - b
			}
		}
		for t := 0; t < Ti; t++ {
			sd, inv := st.MidSD[t], st.MidInv[t]
			acc := 0.0
			if t+1 < Ti {
				acc = st.LBlk[t+1] * w[t+1]
			} else {
				sd, inv = st.LastSD[t], st.LastInv[t]
			}
			if t > 0 {
				acc += st.LBlk[t] * w[t-1]
			}
			mean := -acc * inv
			yt := y[t]
			if yt != yt { // missing
				w[t] = mean + sd*rng.NormFloat64()
				continue
			}
			shift := nu[t] + b + mean
			if g != 0 {
				shift += l.Time[t] * g
			}
			k := int(yt)
			a, c := math.Inf(-1), math.Inf(1)
			if k > 0 {
				a = tau[k-1] - shift
			}
			if k < nt {
				c = tau[k] - shift
			}
			isd := 1 / sd
			if lb.record != nil {
				lb.record(a*isd, c*isd)
			}
			w[t] = mean + sd*latentresp.TruncStdNormal(rng, a*isd, c*isd)
		}
		for t := 0; t < Ti; t++ {
			ys[t] = w[t] + nu[t] + b
			if g != 0 {
				ys[t] += l.Time[t] * g
			}
			x := w[t]
			if t > 0 {
				x -= st.A[t] * w[t-1]
			}
			quad += x * x * st.SigInv[t]
		}
	}
	lb.wq[s][0] = quad
}

// accumulateWQuad adds one person's terms of State.WQuad (lower triangle
// and diagonal only; the caller symmetrizes) for within path w of Ti
// occasions; v and sv are J x J scratch.
func accumulateWQuad(st *State, m, w []float64, Ti int, v, sv []float64) {
	J := st.L.J
	JJ := J * J
	if J == 1 {
		for t := 0; t < Ti; t++ {
			x := w[t]
			if t > 0 {
				x -= st.A[t] * w[t-1]
			}
			m[0] += x * x * st.SigInv[t]
		}
		return
	}
	for t := 0; t < Ti; t++ {
		si := st.SigInv[t*JJ : (t+1)*JJ]
		for j := 0; j < J; j++ {
			vj := v[j*J : (j+1)*J]
			for r := range vj {
				x := 0.0
				if r == j {
					x = w[t*J+j]
				}
				if t > 0 {
					x -= st.A[t*JJ+r*J+j] * w[(t-1)*J+j]
				}
				vj[r] = x
			}
			dense.MulVec(sv[j*J:(j+1)*J], si, vj, J, J)
		}
		for j := 0; j < J; j++ {
			for k := 0; k <= j; k++ {
				x := 0.0
				for r := 0; r < J; r++ {
					x += v[j*J+r] * sv[k*J+r]
				}
				m[j*J+k] += x
			}
		}
	}
}

// symmetrize copies the lower triangle of the n x n matrix m to the upper.
func symmetrize(m []float64, n int) {
	for j := 0; j < n; j++ {
		for k := 0; k < j; k++ {
			m[k*n+j] = m[j*n+k]
		}
	}
}

// InterceptBlock draws each person's random intercepts b_i from their
// multivariate normal full conditional given the latent responses: with
// e_t = y*_t - nu_t, the innovations are zeta_1 = e_1 - b and
// zeta_t = (e_t - A_t e_{t-1}) - (I - A_t) b, so b_i has precision
// Psi^{-1} + Sigma_1^{-1} + sum_t (I-A_t)' Sigma_t^{-1} (I-A_t).
// Reads Ystar, Nu, A, Psi and the caches; writes B.
type InterceptBlock struct {
	g     []float64 // T blocks: (I-A_t)' Sigma_t^{-1}
	cum   []float64 // T blocks: precision for a person with t+1 occasions
	chol  []float64 // T blocks: Cholesky factors of cum
	psiIn []float64
	gp    []float64   // ARMA(1,1): the previous occasion's G
	rp    [][]float64 // ARMA(1,1): per shard, the previous r
	e, h  [][]float64 // per shard
	r     [][]float64 // per shard
	tmp   []float64
}

// NewInterceptBlock allocates the block's workspace.
func NewInterceptBlock(l *Layout) *InterceptBlock {
	J, T := l.J, l.T
	return &InterceptBlock{g: make([]float64, T*J*J), cum: make([]float64, T*J*J), chol: make([]float64, T*J*J),
		psiIn: make([]float64, J*J), gp: make([]float64, J*J), rp: shardBufs(l, J), e: shardBufs(l, l.MaxLen*J), h: shardBufs(l, J), r: shardBufs(l, J), tmp: make([]float64, 3*J*J)}
}

// Name implements Block.
func (*InterceptBlock) Name() string { return "random intercepts" }

// Update implements Block.
func (ib *InterceptBlock) Update(st *State, _ *rand.Rand) error {
	if err := ib.prepare(st); err != nil {
		return err
	}
	l := st.L
	if len(l.ShardStart) == 2 {
		ib.drawShard(st, 0, 0, l.N)
	} else {
		forShards(l, func(s, lo, hi int) { ib.drawShard(st, s, lo, hi) })
	}
	return nil
}

// prepare computes Psi^{-1}, the matrices G_t = (I-A_t)' Sigma_t^{-1} and
// the conditional precisions (and their Cholesky factors) of persons
// observed for 1..T occasions.
func (ib *InterceptBlock) prepare(st *State) error {
	l := st.L
	J, T := l.J, l.T
	JJ := J * J
	if !dense.Inverse(ib.psiIn, st.Psi, J, ib.tmp[:JJ], ib.tmp[JJ:JJ+J]) {
		return errBlock("random intercepts", "random-intercept covariance is not positive definite")
	}
	ima := ib.tmp[:JJ]
	for t := 0; t < T; t++ {
		cum := ib.cum[t*JJ : (t+1)*JJ]
		if t == 0 && l.Dyn {
			// Lagged latent response: zeta_1 = e_1 - Lambda b, so G_1 =
			// Lambda' Sigma_1^{-1} (term_dynamic.go).
			_, lam, _ := st.dynParts()
			dense.MulTA(ib.g[:JJ], lam, st.SigInv[:JJ], J, J, J)
			hm := ib.tmp[JJ : 2*JJ]
			dense.Mul(hm, ib.g[:JJ], lam, J, J, J)
			for k := range cum {
				cum[k] = ib.psiIn[k] + hm[k]
			}
		} else if t == 0 {
			for k := range cum {
				cum[k] = ib.psiIn[k] + st.SigInv[k]
			}
		} else {
			copy(cum, ib.cum[(t-1)*JJ:t*JJ])
			a := st.A[t*JJ : (t+1)*JJ]
			for k := range ima {
				ima[k] = -a[k]
			}
			if l.Dyn {
				// zeta_t = (e_t - A_t e_t-1) - b: the design is I.
				for k := range ima {
					ima[k] = 0
				}
			}
			for k := 0; k < J; k++ {
				ima[k*J+k]++
			}
			if l.MA {
				// G_t = (I - A_t) - M_t G_{t-1}: the innovations of a
				// unit shift of every occasion (movingavg.go).
				if t == 1 {
					dense.Identity(ib.gp, J)
				}
				for r := 0; r < J; r++ {
					m := st.M[t*J+r]
					for c := 0; c < J; c++ {
						ima[r*J+c] -= m * ib.gp[r*J+c]
					}
				}
				copy(ib.gp, ima)
			}
			g := ib.g[t*JJ : (t+1)*JJ]
			dense.MulTA(g, ima, st.SigInv[t*JJ:(t+1)*JJ], J, J, J)
			hm := ib.tmp[JJ : 2*JJ]
			dense.Mul(hm, g, ima, J, J, J)
			for k := range cum {
				cum[k] += hm[k]
			}
		}
		ch := ib.chol[t*JJ : (t+1)*JJ]
		copy(ch, cum)
		if !dense.Cholesky(ch, J) {
			return errBlock("random intercepts", "conditional precision is not positive definite")
		}
	}
	return nil
}

// drawShard draws the random intercepts of persons lo..hi-1 with shard s's
// stream and scratch.
func (ib *InterceptBlock) drawShard(st *State, s, lo, hi int) {
	l := st.L
	J := l.J
	JJ := J * J
	h, rng := ib.h[s], st.ShardRng[s]
	for i := lo; i < hi; i++ {
		ib.personSums(st, s, i, false)
		Ti := l.Panel.Len[i]
		ch := ib.chol[(Ti-1)*JJ : Ti*JJ]
		dense.SolveLower(ch, J, h)
		for q := 0; q < J; q++ {
			h[q] += rng.NormFloat64()
		}
		dense.SolveUpperT(ch, J, h)
		copy(st.B[i*J:i*J+J], h)
	}
}

// personSums leaves in ib.h[s] person i's linear term h = sum_t G_t r_t of
// the random intercepts' conditional (G_1 = Sigma_1^{-1}, r_1 = e_1,
// r_t = e_t - A_t e_{t-1}, e = y* - nu). With quad it also returns
// sum_t r_t' Sigma_t^{-1} r_t (else 0).
func (ib *InterceptBlock) personSums(st *State, s, i int, quad bool) float64 {
	l := st.L
	J := l.J
	JJ := J * J
	e, h, r := ib.e[s], ib.h[s], ib.r[s]
	off := l.Panel.Offset[i]
	Ti := l.Panel.Len[i]
	for c := 0; c < Ti*J; c++ {
		e[c] = st.Ystar[off+c] - st.Nu[c]
	}
	if l.Dyn {
		dense.MulVec(h, ib.g[:JJ], e[:J], J, J)
	} else {
		dense.MulVec(h, st.SigInv[:JJ], e[:J], J, J)
	}
	sum := 0.0
	if quad {
		for q := 0; q < J; q++ {
			sum += e[q] * h[q]
		}
	}
	rp := ib.rp[s]
	if l.MA {
		copy(rp, e[:J])
	}
	for t := 1; t < Ti; t++ {
		a := st.A[t*JJ : (t+1)*JJ]
		for q := 0; q < J; q++ {
			v := e[t*J+q]
			for k := 0; k < J; k++ {
				v -= a[q*J+k] * e[(t-1)*J+k]
			}
			r[q] = v
		}
		if l.MA {
			for q := 0; q < J; q++ {
				r[q] -= st.M[t*J+q] * rp[q]
			}
			copy(rp, r)
		}
		g := ib.g[t*JJ : (t+1)*JJ]
		for q := 0; q < J; q++ {
			v := 0.0
			for k := 0; k < J; k++ {
				v += g[q*J+k] * r[k]
			}
			h[q] += v
		}
		if quad {
			sum += dense.Quad(st.SigInv[t*JJ:(t+1)*JJ], r, J)
		}
	}
	return sum
}

// PsiBlock draws the random-intercept covariance from its conjugate
// inverse-Wishart full conditional IW(df0 + N, S0 + sum_i b_i b_i').
// Reads B; writes Psi.
type PsiBlock struct{ s, work []float64 }

// NewPsiBlock allocates the block's workspace.
func NewPsiBlock(l *Layout) *PsiBlock {
	return &PsiBlock{s: make([]float64, l.J*l.J), work: make([]float64, 3*l.J*l.J+l.J)}
}

// Name implements Block.
func (*PsiBlock) Name() string { return "random-intercept covariance" }

// Update implements Block.
func (pb *PsiBlock) Update(st *State, rng *rand.Rand) error {
	l := st.L
	J := l.J
	dense.Identity(pb.s, J)
	for k := range pb.s {
		pb.s[k] *= l.Priors.RIScale
	}
	for i := 0; i < l.N; i++ {
		b := st.B[i*J : i*J+J]
		for a := 0; a < J; a++ {
			for c := 0; c < J; c++ {
				pb.s[a*J+c] += b[a] * b[c]
			}
		}
	}
	df := float64(J) + l.Priors.RIDfExtra + float64(l.N)
	if !invWishart(st.Psi, rng, df, pb.s, J, pb.work) {
		return errBlock("random-intercept covariance", "scale matrix is not positive definite")
	}
	return nil
}
