package sampler

import (
	"math"
	"math/rand/v2"

	"github.com/lagstar/lagstar/internal/dense"
)

// GrowthBlock draws the growth factors f_i = (b_i, g_i) of every person
// and their means mu jointly, from p(mu, f | y*, paths, covariances, Psi):
// mu from its conditional with the factors integrated out, then each f_i
// given mu. With e_t = y*_t - nu_t and the time scores s_t, the
// innovations are zeta_1 = e_1 - Z_1 f and zeta_t = r_t - Zt_t f, where
// Z_t = [I, s_t I], Zt_t = Z_t - A_t Z_{t-1} and r_t = e_t - A_t e_{t-1},
// so f_i | mu has precision P = Psi^{-1} + sum_t Zt_t' Sigma_t^{-1} Zt_t
// (which depends only on how many occasions the person spans) and mean
// P^{-1} (Psi^{-1} mu + h_i), h_i = sum_t Zt_t' Sigma_t^{-1} r_t.
// Integrating f_i out leaves, as a function of mu,
//
//	-1/2 mu' (Psi^{-1} - Psi^{-1} P^{-1} Psi^{-1}) mu + mu' Psi^{-1} P^{-1} h_i,
//
// a normal likelihood; with the normal prior of the free means (a
// categorical outcome's mean intercept is 0) mu is drawn from it exactly.
// Drawing the means marginally removes the dependence between mu and the
// factors that slows a centred Gibbs sampler when the factors' variances
// are small (Gelfand, Sahu & Carlin 1995, Biometrika 82:479).
// Reads Ystar, Nu, A, Psi and the caches; writes B, G and GMean.
type GrowthBlock struct {
	n, J    int
	zt, g   []float64 // T blocks: Zt_t (J x n) and Zt_t' Sigma_t^{-1} (n x J)
	cum     []float64 // T blocks n x n: P for a person spanning t+1 occasions
	chol    []float64 // their Cholesky factors
	u       []float64 // T blocks n x n: Psi^{-1} P^{-1} Psi^{-1}
	psiIn   []float64
	count   []int     // persons spanning t+1 occasions
	h       []float64 // N x n: each person's h_i
	sx      [][]float64
	e, r, m [][]float64 // per shard
	q, l    []float64   // free means: precision and linear term
	free    []int
	tmp     []float64
}

// NewGrowthBlock allocates the block's workspace.
func NewGrowthBlock(l *Layout) *GrowthBlock {
	J, T, n := l.J, l.T, 2*l.J
	b := &GrowthBlock{n: n, J: J, zt: make([]float64, T*J*n), g: make([]float64, T*n*J), cum: make([]float64, T*n*n),
		chol: make([]float64, T*n*n), u: make([]float64, T*n*n), psiIn: make([]float64, n*n), count: make([]int, T),
		h: make([]float64, l.N*n), sx: shardBufs(l, n), e: shardBufs(l, l.MaxLen*J), r: shardBufs(l, J), m: shardBufs(l, n),
		q: make([]float64, n*n), l: make([]float64, n), tmp: make([]float64, 2*n*n+n)}
	for _, ti := range l.Panel.Len {
		b.count[ti-1]++
	}
	for k := 0; k < n; k++ {
		if growthMeanFree(l, k) {
			b.free = append(b.free, k)
		}
	}
	return b
}

// Name implements Block.
func (*GrowthBlock) Name() string { return "growth factors" }

// Update implements Block.
func (b *GrowthBlock) Update(st *State, rng *rand.Rand) error {
	if err := b.prepare(st); err != nil {
		return err
	}
	l := st.L
	if len(l.ShardStart) == 2 {
		b.sums(st, 0, 0, l.N)
	} else {
		forShards(l, func(s, lo, hi int) { b.sums(st, s, lo, hi) })
	}
	if err := b.drawMeans(st, rng); err != nil {
		return err
	}
	if len(l.ShardStart) == 2 {
		b.drawShard(st, 0, 0, l.N)
	} else {
		forShards(l, func(s, lo, hi int) { b.drawShard(st, s, lo, hi) })
	}
	return nil
}

// prepare computes Psi^{-1}, Zt_t, Zt_t' Sigma_t^{-1}, and the precisions
// P (with their Cholesky factors and Psi^{-1} P^{-1} Psi^{-1}) of persons
// spanning 1..T occasions.
func (b *GrowthBlock) prepare(st *State) error {
	l := st.L
	J, T, n := l.J, l.T, b.n
	JJ, nn := J*J, n*n
	chol, work := b.tmp[:nn], b.tmp[2*nn:]
	if !dense.Inverse(b.psiIn, st.Psi, n, chol, work) {
		return errBlock("growth factors", "covariance of the intercepts and slopes is not positive definite")
	}
	hm, pinv := b.tmp[:nn], b.tmp[nn:2*nn]
	for t := 0; t < T; t++ {
		zt := b.zt[t*J*n : (t+1)*J*n]
		clear(zt)
		for r := 0; r < J; r++ {
			zt[r*n+r], zt[r*n+J+r] = 1, l.Time[t]
		}
		if t > 0 {
			a := st.A[t*JJ : (t+1)*JJ]
			for r := 0; r < J; r++ {
				for c := 0; c < J; c++ {
					zt[r*n+c] -= a[r*J+c]
					zt[r*n+J+c] -= l.Time[t-1] * a[r*J+c]
				}
			}
		}
		g := b.g[t*n*J : (t+1)*n*J]
		dense.MulTA(g, zt, st.SigInv[t*JJ:(t+1)*JJ], J, n, J)
		cum := b.cum[t*nn : (t+1)*nn]
		if t == 0 {
			copy(cum, b.psiIn)
		} else {
			copy(cum, b.cum[(t-1)*nn:t*nn])
		}
		dense.Mul(hm, g, zt, n, J, n)
		for k := range cum {
			cum[k] += hm[k]
		}
		ch := b.chol[t*nn : (t+1)*nn]
		copy(ch, cum)
		if !dense.Cholesky(ch, n) {
			return errBlock("growth factors", "conditional precision is not positive definite")
		}
		if b.count[t] > 0 {
			dense.InverseFromChol(pinv, ch, n, work)
			dense.Mul(hm, pinv, b.psiIn, n, n, n)
			dense.Mul(b.u[t*nn:(t+1)*nn], b.psiIn, hm, n, n, n)
		}
	}
	return nil
}

// sums stores h_i for persons lo..hi-1 and adds P^{-1} h_i into shard
// s's sum.
func (b *GrowthBlock) sums(st *State, s, lo, hi int) {
	l := st.L
	n := b.n
	nn := n * n
	sx, m := b.sx[s], b.m[s]
	clear(sx)
	for i := lo; i < hi; i++ {
		b.personH(st, s, i, false)
		h := b.h[i*n : (i+1)*n]
		Ti := l.Panel.Len[i]
		ch := b.chol[(Ti-1)*nn : Ti*nn]
		copy(m, h)
		dense.SolveLower(ch, n, m)
		dense.SolveUpperT(ch, n, m)
		for q := range sx {
			sx[q] += m[q]
		}
	}
}

// personH writes person i's h_i into b.h (with shard s's scratch); with
// quad it returns sum_t r_t' Sigma_t^{-1} r_t (else 0).
func (b *GrowthBlock) personH(st *State, s, i int, quad bool) float64 {
	l := st.L
	J, n := l.J, b.n
	JJ := J * J
	e, r := b.e[s], b.r[s]
	off := l.Panel.Offset[i]
	Ti := l.Panel.Len[i]
	for c := 0; c < Ti*J; c++ {
		e[c] = st.Ystar[off+c] - st.Nu[c]
	}
	h := b.h[i*n : (i+1)*n]
	dense.MulVec(h, b.g[:n*J], e[:J], n, J)
	sum := 0.0
	if quad {
		sum = dense.Quad(st.SigInv[:JJ], e[:J], J)
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
		g := b.g[t*n*J : (t+1)*n*J]
		for q := 0; q < n; q++ {
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

// drawMeans draws the free means from their conditional with the factors
// integrated out.
func (b *GrowthBlock) drawMeans(st *State, rng *rand.Rand) error {
	l := st.L
	n, nn := b.n, b.n*b.n
	p := len(b.free)
	sx := b.tmp[:n]
	clear(sx)
	for _, part := range b.sx {
		for q := range sx {
			sx[q] += part[q]
		}
	}
	for a, ka := range b.free {
		v := 0.0
		for k := 0; k < n; k++ {
			v += b.psiIn[ka*n+k] * sx[k]
		}
		b.l[a] = v
		for c, kc := range b.free {
			v := 0.0
			for t, cnt := range b.count {
				if cnt > 0 {
					v += float64(cnt) * (b.psiIn[ka*n+kc] - b.u[t*nn+ka*n+kc])
				}
			}
			b.q[a*p+c] = v
		}
		sd := growthMeanSD(l, l.Priors, ka)
		b.q[a*p+a] += 1 / (sd * sd)
	}
	if !dense.Cholesky(b.q[:p*p], p) {
		return errBlock("growth factors", "precision of the growth means is not positive definite")
	}
	x := b.l[:p]
	dense.SolveLower(b.q, p, x)
	for a := range x {
		x[a] += rng.NormFloat64()
	}
	dense.SolveUpperT(b.q, p, x)
	clear(st.GMean)
	for a, ka := range b.free {
		st.GMean[ka] = x[a]
	}
	return nil
}

// drawShard draws the factors of persons lo..hi-1 given the means.
func (b *GrowthBlock) drawShard(st *State, s, lo, hi int) {
	l := st.L
	J, n := l.J, b.n
	nn := n * n
	m, rng := b.m[s], st.ShardRng[s]
	for i := lo; i < hi; i++ {
		h := b.h[i*n : (i+1)*n]
		for q := 0; q < n; q++ {
			v := h[q]
			for k := 0; k < n; k++ {
				v += b.psiIn[q*n+k] * st.GMean[k]
			}
			m[q] = v
		}
		ch := b.chol[(l.Panel.Len[i]-1)*nn : l.Panel.Len[i]*nn]
		dense.SolveLower(ch, n, m)
		for q := range m {
			m[q] += rng.NormFloat64()
		}
		dense.SolveUpperT(ch, n, m)
		copy(st.B[i*J:i*J+J], m[:J])
		copy(st.G[i*J:i*J+J], m[J:])
	}
}

// GrowthCovBlock draws the covariance of the growth factors from its
// conjugate inverse-Wishart full conditional IW(df0 + N, S0 + sum_i
// (f_i - mu)(f_i - mu)'). Reads B, G and GMean; writes Psi.
type GrowthCovBlock struct{ s, work, d []float64 }

// NewGrowthCovBlock allocates the block's workspace.
func NewGrowthCovBlock(l *Layout) *GrowthCovBlock {
	n := 2 * l.J
	return &GrowthCovBlock{s: make([]float64, n*n), work: make([]float64, 3*n*n+n), d: make([]float64, n)}
}

// Name implements Block.
func (*GrowthCovBlock) Name() string { return "growth covariance" }

// Update implements Block.
func (gb *GrowthCovBlock) Update(st *State, rng *rand.Rand) error {
	l := st.L
	J, n := l.J, 2*l.J
	growthPriorScale(gb.s, l, l.Priors)
	for i := 0; i < l.N; i++ {
		for j := 0; j < J; j++ {
			gb.d[j] = st.B[i*J+j] - st.GMean[j]
			gb.d[J+j] = st.G[i*J+j] - st.GMean[J+j]
		}
		for a := 0; a < n; a++ {
			for c := 0; c < n; c++ {
				gb.s[a*n+c] += gb.d[a] * gb.d[c]
			}
		}
	}
	df := float64(n) + l.Priors.RIDfExtra + float64(l.N)
	if !invWishart(st.Psi, rng, df, gb.s, n, gb.work) {
		return errBlock("growth covariance", "scale matrix is not positive definite")
	}
	return nil
}

// Writes implements Block.
func (*GrowthBlock) Writes() Part    { return PartIntercepts }
func (*GrowthCovBlock) Writes() Part { return PartInterceptCov }

// GrowthInterweaveBlock is the ancillary half of an interweaving strategy
// (Yu & Meng 2011, JCGS 20:531) for the covariance of the growth factors:
// after GrowthCovBlock's centred draw it writes f_i = mu + L eta_i with L
// the lower Cholesky factor of Psi, holds eta and mu fixed, and draws
// every element of L in turn from its full conditional in that
// non-centred parameterization. The factors enter the innovations
// linearly, r_t - Zt_t mu - Zt_t L eta_i (GrowthBlock's notation), so the
// likelihood is Gaussian in the elements l of L, exp(-1/2 l'P l + h'l)
// with P_(ab),(cd) = sum_i eta_ib (K_i)_ac eta_id and h_(ab) = sum_i eta_ib
// (h_i - K_i mu)_a, K_i = sum_t Zt_t' Sigma_t^-1 Zt_t; the prior is the
// inverse-Wishart(nu, S0) density of L L' times the Jacobian of the
// Cholesky map, 2^n prod_k L_kk^(n-k+1) (k = 1..n). Each element is drawn
// by slice sampling (Neal 2003), the diagonal ones on log L_kk. Unlike
// moving the scales alone, this also moves the intercept-slope
// covariances, which the intercept at the first time score ties tightly
// to the variances when persons' lines are weakly determined (binary and
// ordinal outcomes over a few waves). Reads Ystar, Nu, A, SigInv, B, G,
// GMean, Psi; writes B, G and Psi.
type GrowthInterweaveBlock struct {
	gb           *GrowthBlock // its prepare and workspace
	el           [][2]int     // the elements (a, b), a >= b, of L
	lc, old, inv []float64
	s0           []float64
	p, h         []float64
	pp, ph, eta  [][]float64 // per shard
	kk, v        [][]float64
}

// NewGrowthInterweaveBlock allocates the block's workspace; it shares
// gb's precisions and per-person sums (the blocks run one after the other
// and each recomputes them).
func NewGrowthInterweaveBlock(l *Layout, gb *GrowthBlock) *GrowthInterweaveBlock {
	n := 2 * l.J
	ib := &GrowthInterweaveBlock{gb: gb, lc: make([]float64, n*n), old: make([]float64, n*n), inv: make([]float64, n*n),
		s0: make([]float64, n*n), eta: shardBufs(l, n), kk: shardBufs(l, n*n), v: shardBufs(l, n)}
	for a := 0; a < n; a++ {
		for b := 0; b <= a; b++ {
			ib.el = append(ib.el, [2]int{a, b})
		}
	}
	m := len(ib.el)
	ib.p, ib.h, ib.pp, ib.ph = make([]float64, m*m), make([]float64, m), shardBufs(l, m*m), shardBufs(l, m)
	return ib
}

// Name implements Block.
func (*GrowthInterweaveBlock) Name() string { return "growth covariance (interweaving)" }

// Writes implements Block.
func (*GrowthInterweaveBlock) Writes() Part { return PartIntercepts | PartInterceptCov }

// Update implements Block.
func (ib *GrowthInterweaveBlock) Update(st *State, rng *rand.Rand) error {
	l := st.L
	J, n := l.J, 2*l.J
	m := len(ib.el)
	if err := ib.gb.prepare(st); err != nil {
		return err
	}
	copy(ib.lc, st.Psi)
	if !dense.Cholesky(ib.lc, n) {
		return errBlock(ib.Name(), "covariance of the intercepts and slopes is not positive definite")
	}
	if len(l.ShardStart) == 2 {
		ib.sums(st, 0, 0, l.N)
	} else {
		forShards(l, func(s, lo, hi int) { ib.sums(st, s, lo, hi) })
	}
	clear(ib.p)
	clear(ib.h)
	for s := range ib.pp {
		for k := range ib.p {
			ib.p[k] += ib.pp[s][k]
		}
		for k := range ib.h {
			ib.h[k] += ib.ph[s][k]
		}
	}
	nu := float64(n) + l.Priors.RIDfExtra
	growthPriorScale(ib.s0, l, l.Priors)
	copy(ib.old, ib.lc)
	for e, ab := range ib.el {
		a, b := ab[0], ab[1]
		lin := ib.h[e]
		for q, cd := range ib.el {
			if q != e {
				lin -= ib.p[e*m+q] * ib.lc[cd[0]*n+cd[1]]
			}
		}
		pee := ib.p[e*m+e]
		at := func(x float64) float64 { // log conditional at L_ab = x
			ib.lc[a*n+b] = x
			return -0.5*pee*x*x + lin*x + ib.logPrior(n, nu)
		}
		if a == b {
			u := sliceDraw(rng, math.Log(ib.lc[a*n+a]), func(u float64) float64 { return at(math.Exp(u)) + u }, 0.5)
			ib.lc[a*n+a] = math.Exp(u)
		} else {
			sd := math.Sqrt(st.Psi[a*n+a]) + 1e-3
			ib.lc[a*n+b] = sliceDraw(rng, ib.old[a*n+b], at, 0.5*sd)
		}
	}
	// f_i = mu + L_new L_old^-1 (f_i - mu).
	eta := ib.eta[0]
	for i := 0; i < l.N; i++ {
		for j := 0; j < J; j++ {
			eta[j] = st.B[i*J+j] - st.GMean[j]
			eta[J+j] = st.G[i*J+j] - st.GMean[J+j]
		}
		dense.SolveLower(ib.old, n, eta)
		for r := 0; r < n; r++ {
			x := st.GMean[r]
			for c := 0; c <= r; c++ {
				x += ib.lc[r*n+c] * eta[c]
			}
			if r < J {
				st.B[i*J+r] = x
			} else {
				st.G[i*J+r-J] = x
			}
		}
	}
	dense.MulBT(st.Psi, ib.lc, ib.lc, n, n, n)
	return nil
}

// logPrior returns the log prior density of the current L (ib.lc): the
// inverse-Wishart(nu, S0) density of L L' with the Cholesky Jacobian, up
// to a constant; -Inf outside positive diagonals.
func (ib *GrowthInterweaveBlock) logPrior(n int, nu float64) float64 {
	lp := 0.0
	for k := 0; k < n; k++ {
		d := ib.lc[k*n+k]
		if !(d > 0) {
			return math.Inf(-1)
		}
		// |Psi|^-(nu+n+1)/2 = prod d^-(nu+n+1); Jacobian d^(n-k) (k from 0).
		lp += (float64(n-k) - (nu + float64(n) + 1)) * math.Log(d)
	}
	// tr(S0 Psi^-1) = sum_k s_k sum_j (L^-1)_jk^2 for diagonal S0.
	inv := ib.inv
	for c := 0; c < n; c++ {
		col := inv[c*n : (c+1)*n] // column c of L^-1, stored as a row
		for r := 0; r < n; r++ {
			x := 0.0
			if r == c {
				x = 1
			}
			for k := 0; k < r; k++ {
				x -= ib.lc[r*n+k] * col[k]
			}
			col[r] = x / ib.lc[r*n+r]
		}
		tr := 0.0
		for _, x := range col {
			tr += x * x
		}
		lp -= 0.5 * ib.s0[c*n+c] * tr
	}
	return lp
}

// sums adds the terms of P and h of persons lo..hi-1 into shard s's
// partial sums.
func (ib *GrowthInterweaveBlock) sums(st *State, s, lo, hi int) {
	l := st.L
	J, n := l.J, 2*l.J
	nn, m := n*n, len(ib.el)
	gb := ib.gb
	pp, ph, eta, kk, v := ib.pp[s], ib.ph[s], ib.eta[s], ib.kk[s], ib.v[s]
	clear(pp)
	clear(ph)
	for i := lo; i < hi; i++ {
		gb.personH(st, s, i, false) // h_i into gb.h
		L := l.Panel.Len[i]
		cum := gb.cum[(L-1)*nn : L*nn]
		for k := range kk {
			kk[k] = cum[k] - gb.psiIn[k]
		}
		for j := 0; j < J; j++ {
			eta[j] = st.B[i*J+j] - st.GMean[j]
			eta[J+j] = st.G[i*J+j] - st.GMean[J+j]
		}
		dense.SolveLower(ib.lc, n, eta)
		h := gb.h[i*n : (i+1)*n]
		for a := 0; a < n; a++ {
			x := h[a]
			for b := 0; b < n; b++ {
				x -= kk[a*n+b] * st.GMean[b]
			}
			v[a] = x
		}
		for e, ab := range ib.el {
			ph[e] += eta[ab[1]] * v[ab[0]]
			for q, cd := range ib.el {
				pp[e*m+q] += eta[ab[1]] * kk[ab[0]*n+cd[0]] * eta[cd[1]]
			}
		}
	}
}
