package sampler

import (
	"math"
	"math/rand/v2"

	"github.com/lagstar/lagstar/internal/dense"
	"github.com/lagstar/lagstar/latentresp"
)

// The ARMA(1,1) within part (term_movingavg.go):
//
//	w_1 = zeta_1,  w_2 = A_2 w_1 + zeta_2,  w_t = A_t w_{t-1} + zeta_t + M_t zeta_{t-1} (t >= 3),
//
// zeta_t ~ N(0, Sigma_t), M_t diagonal. The first occasion is exogenous
// and is not an innovation of the process, so the moving average first
// acts on the second occasion's innovation (the pre-sample innovation is
// set to its mean, as in the conditional likelihood of Box, Jenkins &
// Reinsel 2008, ch. 7). The map from a person's w to its innovations,
// zeta_t = w_t - A_t w_{t-1} - M_t zeta_{t-1}, is unit lower triangular,
// so the exact log density of w is sum_t log N(zeta_t; 0, Sigma_t): every
// block below works with innovations computed by that recursion (State.M
// is zero at the first two occasions, which gives both starting rules).
// The precision of w is dense (the moving average spreads each w over all
// later innovations), so no block here relies on the banded structure of
// the autoregressive model.

// innovationsInto writes into z the innovations of a person's within
// path w of Ti occasions.
func (s *State) innovationsInto(z, w []float64, Ti int) {
	J := s.L.J
	JJ := J * J
	copy(z[:J], w[:J])
	for t := 1; t < Ti; t++ {
		a := s.A[t*JJ : (t+1)*JJ]
		m := s.M[t*J : (t+1)*J]
		wt, wp := w[t*J:(t+1)*J], w[(t-1)*J:t*J]
		zt, zp := z[t*J:(t+1)*J], z[(t-1)*J:t*J]
		for r := 0; r < J; r++ {
			v := wt[r] - m[r]*zp[r]
			for c := 0; c < J; c++ {
				v -= a[r*J+c] * wp[c]
			}
			zt[r] = v
		}
	}
}

// innovationLogDensity returns -1/2 sum over persons and occasions of
// zeta' Sigma^{-1} zeta at the state's latent responses and parameters
// (the terms of the log density of the within paths that depend on the
// paths and moving averages); w and z are scratch of MaxLen*J.
func (s *State) innovationLogDensity(w, z []float64) float64 {
	l := s.L
	J := l.J
	JJ := J * J
	total := 0.0
	for i := 0; i < l.N; i++ {
		s.fillW(w, i, s.Ystar)
		Ti := l.Panel.Len[i]
		s.innovationsInto(z, w, Ti)
		for t := 0; t < Ti; t++ {
			total += dense.Quad(s.SigInv[t*JJ:(t+1)*JJ], z[t*J:(t+1)*J], J)
		}
	}
	return -0.5 * total
}

// innovationSums adds sum zeta_t zeta_t' over the persons present at each
// occasion to stats[GroupOf[t]] (the covariance block's statistics).
func (s *State) innovationSums(stats [][]float64, w, z []float64) {
	l := s.L
	J := l.J
	for i := 0; i < l.N; i++ {
		s.fillW(w, i, s.Ystar)
		Ti := l.Panel.Len[i]
		s.innovationsInto(z, w, Ti)
		for t := 0; t < Ti; t++ {
			g := l.GroupOf[t]
			if g < 0 {
				continue
			}
			zt := z[t*J : (t+1)*J]
			st := stats[g]
			for a := 0; a < J; a++ {
				for b := 0; b < J; b++ {
					st[a*J+b] += zt[a] * zt[b]
				}
			}
		}
	}
}

// WithinCovariances writes the model-implied covariances of the within
// part: v[t] = Var(w_t) (T blocks of J x J) and, when blocks is not nil,
// blocks[t1*T+t2] = Cov(w_t2, w_t1) for t1 <= t2 (T x T blocks). With
// the moving average, Cov(w_{t-1}, zeta_{t-1}) = Sigma_{t-1}, so
//
//	V_t = A V_{t-1} A' + Sigma_t + M S M' + A S M' + M S A',  S = Sigma_{t-1},
//	Cov(w_t2, w_t1) = A_t2 Cov(w_t2-1, w_t1) + [t2 = t1+1] M_t2 Sigma_t1.
//
// tmp is J x J scratch.
func (s *State) WithinCovariances(v, blocks, tmp []float64) {
	l := s.L
	J, T := l.J, l.T
	JJ := J * J
	copy(v[:JJ], s.Sig[:JJ])
	for t := 1; t < T; t++ {
		a := s.A[t*JJ : (t+1)*JJ]
		m := s.M[t*J : (t+1)*J]
		vt := v[t*JJ : (t+1)*JJ]
		dense.Mul(tmp, a, v[(t-1)*JJ:t*JJ], J, J, J)
		dense.MulBT(vt, tmp, a, J, J, J)
		sp := s.Sig[(t-1)*JJ : t*JJ]
		for r := 0; r < J; r++ {
			for c := 0; c < J; c++ {
				x := s.Sig[t*JJ+r*J+c] + m[r]*sp[r*J+c]*m[c]
				for k := 0; k < J; k++ {
					x += a[r*J+k]*sp[k*J+c]*m[c] + m[r]*sp[r*J+k]*a[c*J+k]
				}
				vt[r*J+c] += x
			}
		}
	}
	if blocks == nil {
		return
	}
	for t1 := 0; t1 < T; t1++ {
		copy(blocks[(t1*T+t1)*JJ:(t1*T+t1+1)*JJ], v[t1*JJ:(t1+1)*JJ])
		for t2 := t1 + 1; t2 < T; t2++ {
			dst := blocks[(t1*T+t2)*JJ : (t1*T+t2+1)*JJ]
			dense.Mul(dst, s.A[t2*JJ:(t2+1)*JJ], blocks[(t1*T+t2-1)*JJ:(t1*T+t2)*JJ], J, J, J)
			if t2 == t1+1 {
				m := s.M[t2*J : (t2+1)*J]
				for r := 0; r < J; r++ {
					for c := 0; c < J; c++ {
						dst[r*J+c] += m[r] * s.Sig[t1*JJ+r*J+c]
					}
				}
			}
		}
	}
}

// stationaryARMA writes into v the stationary variance of an ARMA(1,1)
// with paths a, innovation covariance sig and moving averages m (equal
// over time): the VAR(1) stationary variance with the effective
// innovation covariance sig + m sig m' + a sig m' + m sig a'. It reports
// false when a is not stable.
func stationaryARMA(v, a, sig, m []float64, J int, work []float64) bool {
	eff := work[6*J*J : 7*J*J]
	for r := 0; r < J; r++ {
		for c := 0; c < J; c++ {
			x := sig[r*J+c] + m[r]*sig[r*J+c]*m[c]
			for k := 0; k < J; k++ {
				x += a[r*J+k]*sig[k*J+c]*m[c] + m[r]*sig[r*J+k]*a[c*J+k]
			}
			eff[r*J+c] = x
		}
	}
	return stationaryCov(v, a, eff, J, work)
}

// LatentMABlock draws every latent response of a categorical or missing
// cell from its full conditional under the ARMA(1,1) within part. A
// change d in w_tj changes the innovations zeta_s (s >= t) by d h_s, with
// h_t = e_j, h_{t+1} = -A_{t+1} e_j - M_{t+1} h_t and h_s = -M_s h_{s-1}
// beyond, so w_tj given the rest is normal with precision
// P = sum_s h_s' Sigma_s^{-1} h_s and mean w_tj - sum_s h_s' Sigma_s^{-1}
// zeta_s / P (sums to the person's last occasion), truncated to the
// category's interval (Albert & Chib 1993); the innovations are then
// updated in place. Reads B, Nu, Tau, A, M and Sigma; writes Ystar.
type LatentMABlock struct {
	// Per start occasion t: h and Sigma^{-1} h for every outcome j and
	// s = t..T-1 (index (j*(T-t) + s-t)*J), and the cumulative
	// precisions (index j*(T-t) + s-t).
	h, u, pcum [][]float64
	w, z       [][]float64 // per shard
}

// NewLatentMABlock allocates the block's workspace.
func NewLatentMABlock(l *Layout) *LatentMABlock {
	J, T := l.J, l.T
	b := &LatentMABlock{w: shardBufs(l, l.MaxLen*J), z: shardBufs(l, l.MaxLen*J)}
	for t := 0; t < T; t++ {
		n := T - t
		b.h = append(b.h, make([]float64, J*n*J))
		b.u = append(b.u, make([]float64, J*n*J))
		b.pcum = append(b.pcum, make([]float64, J*n))
	}
	return b
}

// Name implements Block.
func (*LatentMABlock) Name() string { return "latent responses" }

// Writes implements Block.
func (*LatentMABlock) Writes() Part { return PartLatent }

func (b *LatentMABlock) prepare(st *State) {
	l := st.L
	J, T := l.J, l.T
	JJ := J * J
	for t := 0; t < T; t++ {
		n := T - t
		for j := 0; j < J; j++ {
			base := j * n
			for s := t; s < T; s++ {
				h := b.h[t][(base+s-t)*J : (base+s-t+1)*J]
				switch {
				case s == t:
					for r := range h {
						h[r] = 0
					}
					h[j] = 1
				default:
					hp := b.h[t][(base+s-t-1)*J : (base+s-t)*J]
					m := st.M[s*J : (s+1)*J]
					for r := range h {
						h[r] = -m[r] * hp[r]
						if s == t+1 {
							h[r] -= st.A[s*JJ+r*J+j]
						}
					}
				}
				u := b.u[t][(base+s-t)*J : (base+s-t+1)*J]
				dense.MulVec(u, st.SigInv[s*JJ:(s+1)*JJ], h, J, J)
				p := 0.0
				for r := range h {
					p += h[r] * u[r]
				}
				if s > t {
					p += b.pcum[t][base+s-t-1]
				}
				b.pcum[t][base+s-t] = p
			}
		}
	}
}

// Update implements Block.
func (b *LatentMABlock) Update(st *State, _ *rand.Rand) error {
	b.prepare(st)
	l := st.L
	if len(l.ShardStart) == 2 {
		b.updateShard(st, 0, 0, l.N)
	} else {
		forShards(l, func(s, lo, hi int) { b.updateShard(st, s, lo, hi) })
	}
	return nil
}

func (b *LatentMABlock) updateShard(st *State, sh, lo, hi int) {
	l := st.L
	J, T := l.J, l.T
	w, z, rng := b.w[sh], b.z[sh], st.ShardRng[sh]
	for i := lo; i < hi; i++ {
		off := l.Panel.Offset[i]
		Ti := l.Panel.Len[i]
		st.fillW(w, i, st.Ystar)
		st.innovationsInto(z, w, Ti)
		bi := st.B[i*J : i*J+J]
		for t := 0; t < Ti; t++ {
			n, used := T-t, Ti-t
			for j := 0; j < J; j++ {
				c := off + t*J + j
				y := st.Y[c]
				miss := y != y // NaN
				if !miss && !l.Cat[j] {
					continue
				}
				hv := b.h[t][j*n*J : (j*n+used)*J]
				uv := b.u[t][j*n*J : (j*n+used)*J]
				zv := z[t*J : Ti*J]
				lin := 0.0
				for k, x := range uv {
					lin += x * zv[k]
				}
				prec := b.pcum[t][j*n+used-1]
				old := w[t*J+j]
				mean := old - lin/prec
				sd := 1 / math.Sqrt(prec)
				var nw float64
				if miss {
					nw = mean + sd*rng.NormFloat64()
				} else {
					shift := st.Nu[t*J+j] + bi[j] + mean
					lo, hi := st.interval(j, int(y))
					isd := 1 / sd
					nw = mean + sd*latentresp.TruncStdNormal(rng, (lo-shift)*isd, (hi-shift)*isd)
				}
				d := nw - old
				w[t*J+j] = nw
				for k, x := range hv {
					zv[k] += d * x
				}
			}
		}
		for t := 0; t < Ti; t++ {
			for j, bj := range bi {
				st.Ystar[off+t*J+j] = w[t*J+j] + st.Nu[t*J+j] + bj
			}
		}
	}
}

// MAPathBlock updates the moving-average coefficients and the carry-over
// paths of an ARMA(1,1) within part. Given M the innovations are linear
// in the free paths of any set G of occasions (the others held): with
// rho the innovations at A_t = 0 for t in G and x^(p) the recursion
// x_t = [t in G] e_r w_{t-1,c} - M_t x_{t-1} for the free path p = (r,c),
// zeta_t = rho_t - sum_p theta_p x_t^(p). The paths of G therefore have
// a normal full conditional (prior N(0, sd^2)), and with paths equal over
// time (G every occasion) the paths can be integrated out in closed form:
//
//	log p(w | M, Sigma) = -q/2 + h' P^{-1} h / 2 - log det P / 2 + const,
//
// q = sum rho' Sigma^{-1} rho, h = sum X' Sigma^{-1} rho, P the
// conditional precision. Each moving-average coefficient then takes a
// random-walk Metropolis step on that marginal (prior N(0, sd^2)
// truncated to the invertible region (-1, 1)), and the paths are drawn
// afresh from their conditional: a collapsed move in which M and A change
// together, which matters because their posterior is strongly correlated
// (near the common-factor case A = -M it is a ridge). With paths free
// over time, or without carry-over, each coefficient's step targets its
// full conditional given the paths, and the paths of each occasion are
// drawn in turn. Step sizes adapt during warm-up towards acceptance 0.44.
// Reads Ystar, Nu, B, Sigma; writes A and M.
type MAPathBlock struct {
	free          []int
	prec, h       []float64
	w, z, rho, x  []float64
	su            []float64
	coefs         [][]int // per coefficient: its occasions; outcome in coefOf
	coefOf        []int
	logStep       []float64
	tries, accept []int
}

// NewMAPathBlock allocates the block's workspace.
func NewMAPathBlock(l *Layout) *MAPathBlock {
	J := l.J
	b := &MAPathBlock{w: make([]float64, l.MaxLen*J), z: make([]float64, l.MaxLen*J), rho: make([]float64, 2*J), su: make([]float64, J)}
	for k, f := range l.PathFree {
		if f && l.HasPaths() {
			b.free = append(b.free, k)
		}
	}
	n := len(b.free)
	b.prec, b.h, b.x = make([]float64, n*n), make([]float64, n), make([]float64, 2*n)
	for _, occ := range maOccasions(l) {
		for j := 0; j < J; j++ {
			b.coefs = append(b.coefs, occ)
			b.coefOf = append(b.coefOf, j)
		}
	}
	b.logStep = make([]float64, len(b.coefs))
	for k := range b.logStep {
		b.logStep[k] = math.Log(0.1)
	}
	b.tries, b.accept = make([]int, len(b.coefs)), make([]int, len(b.coefs))
	return b
}

// maOccasions lists the occasion sets of the moving-average coefficients:
// one set 2..T-1 when equal over time, else one occasion each.
func maOccasions(l *Layout) [][]int {
	if l.PathsFree {
		var out [][]int
		for t := 2; t < l.T; t++ {
			out = append(out, []int{t})
		}
		return out
	}
	occ := make([]int, 0, l.T)
	for t := 2; t < l.T; t++ {
		occ = append(occ, t)
	}
	return [][]int{occ}
}

// Name implements Block.
func (*MAPathBlock) Name() string { return "moving averages and carry-over paths" }

// Writes implements Block.
func (*MAPathBlock) Writes() Part { return PartPaths }

// Keeps implements CacheKeeper: it refreshes the precision caches itself.
func (*MAPathBlock) Keeps() Cache { return CachePrecision }

// AdaptState implements Adaptive.
func (b *MAPathBlock) AdaptState() []any { return []any{&b.logStep, &b.tries, &b.accept} }

// Update implements Block.
func (b *MAPathBlock) Update(st *State, rng *rand.Rand) error {
	l := st.L
	collapsed := len(b.free) > 0 && !l.PathsFree
	if !l.maFixed {
		sd := l.Priors.PathSD
		var cur float64
		var ok bool
		if collapsed {
			if cur, ok = b.logMarginal(st, nil); !ok {
				return errBlock(b.Name(), "conditional precision of the paths is not positive definite")
			}
		} else {
			cur = st.innovationLogDensity(b.w, b.z)
		}
		for k, occ := range b.coefs {
			j := b.coefOf[k]
			old := st.M[occ[0]*l.J+j]
			prop := old + math.Exp(b.logStep[k])*rng.NormFloat64()
			acc := false
			if prop > -1 && prop < 1 {
				b.setM(st, k, prop)
				var next float64
				ok = true
				if collapsed {
					next, ok = b.logMarginal(st, nil)
				} else {
					next = st.innovationLogDensity(b.w, b.z)
				}
				lr := next - cur - 0.5*(prop*prop-old*old)/(sd*sd)
				if ok && math.Log(rng.Float64()) < lr {
					cur, acc = next, true
				} else {
					b.setM(st, k, old)
				}
			}
			if acc {
				b.accept[k]++
			}
			if st.Warmup {
				b.tries[k]++
				adapt(&b.logStep[k], acc, 0.44, b.tries[k])
			}
		}
	}
	if len(b.free) == 0 {
		return nil
	}
	if !l.PathsFree {
		if err := b.drawPaths(st, rng, nil); err != nil {
			return err
		}
		return st.Refresh()
	}
	for t := 1; t < l.T; t++ {
		if err := b.drawPaths(st, rng, []int{t}); err != nil {
			return err
		}
	}
	return st.Refresh()
}

func (b *MAPathBlock) setM(st *State, k int, v float64) {
	j := b.coefOf[k]
	for _, t := range b.coefs[k] {
		st.M[t*st.L.J+j] = v
	}
}

// stats fills b.prec (the conditional precision of the free paths of the
// occasions in g, nil: all, prior included) and b.h, and returns q.
func (b *MAPathBlock) stats(st *State, g []int) float64 {
	l := st.L
	J := l.J
	JJ := J * J
	n := len(b.free)
	for k := range b.prec {
		b.prec[k] = 0
	}
	for k := range b.h {
		b.h[k] = 0
	}
	inG := func(t int) bool {
		if g == nil {
			return true
		}
		for _, u := range g {
			if u == t {
				return true
			}
		}
		return false
	}
	q := 0.0
	w := b.w
	rp, rc := b.rho[:J], b.rho[J:]
	xp, xc := b.x[:n], b.x[n:]
	su := b.su
	for i := 0; i < l.N; i++ {
		st.fillW(w, i, st.Ystar)
		Ti := l.Panel.Len[i]
		copy(rp, w[:J])
		for p := range xp {
			xp[p] = 0
		}
		for t := 1; t < Ti; t++ {
			in := inG(t)
			a := st.A[t*JJ : (t+1)*JJ]
			m := st.M[t*J : (t+1)*J]
			wt, wprev := w[t*J:(t+1)*J], w[(t-1)*J:t*J]
			for r := 0; r < J; r++ {
				v := wt[r] - m[r]*rp[r]
				if !in {
					for c := 0; c < J; c++ {
						v -= a[r*J+c] * wprev[c]
					}
				}
				rc[r] = v
			}
			for p, f := range b.free {
				r, c := f/J, f%J
				v := -m[r] * xp[p]
				if in {
					v += wprev[c]
				}
				xc[p] = v
			}
			si := st.SigInv[t*JJ : (t+1)*JJ]
			dense.MulVec(su, si, rc, J, J)
			for r := 0; r < J; r++ {
				q += rc[r] * su[r]
			}
			for p1, f1 := range b.free {
				if xc[p1] == 0 {
					continue
				}
				r1 := f1 / J
				b.h[p1] += xc[p1] * su[r1]
				for p2 := 0; p2 <= p1; p2++ {
					b.prec[p1*n+p2] += xc[p1] * xc[p2] * si[r1*J+b.free[p2]/J]
				}
			}
			copy(rp, rc)
			copy(xp, xc)
		}
	}
	iv := 1 / (l.Priors.PathSD * l.Priors.PathSD)
	for p1 := 0; p1 < n; p1++ {
		b.prec[p1*n+p1] += iv
		for p2 := 0; p2 < p1; p2++ {
			b.prec[p2*n+p1] = b.prec[p1*n+p2]
		}
	}
	return q
}

// logMarginal returns the log density of the within paths given M and
// Sigma with the paths of the occasions in g integrated out (up to a
// constant); b.prec holds the Cholesky factor and b.h the solved linear
// term afterwards.
func (b *MAPathBlock) logMarginal(st *State, g []int) (float64, bool) {
	q := b.stats(st, g)
	n := len(b.free)
	if !dense.Cholesky(b.prec, n) {
		return 0, false
	}
	dense.SolveLower(b.prec, n, b.h)
	quad := 0.0
	for _, x := range b.h {
		quad += x * x
	}
	return -0.5*q + 0.5*quad - 0.5*dense.LogDetChol(b.prec, n), true
}

// drawPaths draws the free paths of the occasions in g (nil: all, paths
// equal over time) from their normal full conditional.
func (b *MAPathBlock) drawPaths(st *State, rng *rand.Rand, g []int) error {
	if _, ok := b.logMarginal(st, g); !ok {
		return errBlock(b.Name(), "conditional precision of the paths is not positive definite")
	}
	n := len(b.free)
	for k := range b.h {
		b.h[k] += rng.NormFloat64()
	}
	dense.SolveUpperT(b.prec, n, b.h)
	l := st.L
	JJ := l.J * l.J
	for t := 1; t < l.T; t++ {
		if g != nil && g[0] != t {
			continue
		}
		for p, f := range b.free {
			st.A[t*JJ+f] = b.h[p]
		}
	}
	return nil
}

// updateMA is MeanBlock.Update under the ARMA(1,1) within part: with
// e = y* - b and nu_t = X_t theta, the innovations are zeta_t = r_t - Z_t
// theta, where r and Z follow the innovation recursion
// r_t = e_t - A_t e_{t-1} - M_t r_{t-1} (Z likewise from X), so theta has
// precision I/sd^2 + sum_t n_t Z_t' Sigma_t^{-1} Z_t and linear term
// sum_t Z_t' Sigma_t^{-1} sum_i r_it.
func (mb *MeanBlock) updateMA(st *State, rng *rand.Rand) error {
	l := st.L
	J, T, p := l.J, l.T, mb.p
	JJ := J * J
	for k := range mb.maSum {
		mb.maSum[k] = 0
	}
	e, r := mb.maE, mb.maR
	for i := 0; i < l.N; i++ {
		off := l.Panel.Offset[i]
		Ti := l.Panel.Len[i]
		bi := st.B[i*J : i*J+J]
		for t := 0; t < Ti; t++ {
			for j := 0; j < J; j++ {
				e[t*J+j] = st.Ystar[off+t*J+j] - bi[j]
			}
		}
		st.innovationsInto(r, e, Ti)
		for k := 0; k < Ti*J; k++ {
			mb.maSum[k] += r[k]
		}
	}
	for k := range mb.prec {
		mb.prec[k] = 0
	}
	iv := 1 / (l.Priors.MeanSD * l.Priors.MeanSD)
	for k := 0; k < p; k++ {
		mb.prec[k*p+k] = iv
		mb.h[k] = 0
	}
	z, zp, sz := mb.maZ, mb.maZp, mb.maSZ
	for k := range zp {
		zp[k] = 0
	}
	for t := 0; t < T; t++ {
		// Z_t = X_t - A_t X_{t-1} - M_t Z_{t-1}, J x p.
		for k := range z {
			z[k] = -st.M[t*J+k/p] * zp[k]
		}
		for j := 0; j < J; j++ {
			if idx := l.MeanIdx[t*J+j]; idx >= 0 {
				z[j*p+idx]++
			}
		}
		if t > 0 {
			a := st.A[t*JJ : (t+1)*JJ]
			for c := 0; c < J; c++ {
				idx := l.MeanIdx[(t-1)*J+c]
				if idx < 0 {
					continue
				}
				for r := 0; r < J; r++ {
					z[r*p+idx] -= a[r*J+c]
				}
			}
		}
		copy(zp, z)
		n := float64(l.CountAt[t])
		if n == 0 {
			continue
		}
		si := st.SigInv[t*JJ : (t+1)*JJ]
		dense.Mul(sz, si, z, J, J, p) // Sigma^{-1} Z_t
		for a := 0; a < p; a++ {
			for b := 0; b <= a; b++ {
				v := 0.0
				for k := 0; k < J; k++ {
					v += z[k*p+a] * sz[k*p+b]
				}
				mb.prec[a*p+b] += n * v
			}
			v := 0.0
			for k := 0; k < J; k++ {
				v += sz[k*p+a] * mb.maSum[t*J+k]
			}
			mb.h[a] += v
		}
	}
	for a := 0; a < p; a++ {
		for b := 0; b < a; b++ {
			mb.prec[b*p+a] = mb.prec[a*p+b]
		}
	}
	if !dense.Cholesky(mb.prec, p) {
		return errBlock("occasion means", "conditional precision is not positive definite")
	}
	dense.SolveLower(mb.prec, p, mb.h)
	for k := range mb.h {
		mb.h[k] += rng.NormFloat64()
	}
	dense.SolveUpperT(mb.prec, p, mb.h)
	copy(st.Mean, mb.h)
	st.SyncNu()
	return nil
}

// accumulateWQuadMA is accumulateWQuad under the ARMA(1,1) within part:
// outcome j's share of the innovations is the innovation recursion applied
// to w with every other outcome set to 0 (the recursion is linear), and
// m[j][k] gains sum_t share_j' Sigma_t^{-1} share_k (lower triangle and
// diagonal). buf holds (J+1)*MaxLen*J + J values.
func accumulateWQuadMA(st *State, m, w []float64, Ti int, buf []float64) {
	J := st.L.J
	JJ := J * J
	n := Ti * J
	u := buf[:n]
	shares := buf[st.L.MaxLen*J:]
	sv := buf[(J+1)*st.L.MaxLen*J:]
	for j := 0; j < J; j++ {
		for k := range u {
			u[k] = 0
		}
		for t := 0; t < Ti; t++ {
			u[t*J+j] = w[t*J+j]
		}
		st.innovationsInto(shares[j*n:(j+1)*n], u, Ti)
	}
	for t := 0; t < Ti; t++ {
		si := st.SigInv[t*JJ : (t+1)*JJ]
		for k := 0; k < J; k++ {
			dense.MulVec(sv[:J], si, shares[k*n+t*J:k*n+(t+1)*J], J, J)
			for j := k; j < J; j++ {
				x := 0.0
				for r := 0; r < J; r++ {
					x += shares[j*n+t*J+r] * sv[r]
				}
				m[j*J+k] += x
			}
		}
	}
}
