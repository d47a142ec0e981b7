package sampler

import (
	"math"
	"math/rand/v2"

	"github.com/lagstar/lagstar/internal/dense"
)

// Gibbs blocks of the lagged latent response (term_dynamic.go). Each works
// in the dynamic form, where the innovations are
//
//	zeta_i1 = y*_i1 - c_1 - Lambda b_i,   zeta_it = y*_it - c_t - b_i - A_t y*_i,t-1 (t >= 2),
//
// independent N(0, Sigma_t), so with the other parameters fixed the
// intercepts, the loadings and the carry-over each enter linearly and have
// normal full conditionals. The random intercepts are drawn by
// InterceptBlock, whose design for this model is Lambda at the first
// occasion and the identity after it.

// LagInterceptBlock draws the free intercepts c of the dynamic equation
// from their joint normal full conditional: c_t enters zeta_t alone, so
// with r_it = zeta_it + c_t and R_t = sum_i r_it over the n_t persons
// present at t, the precision is I/sd^2 + sum_t n_t Sigma_t^{-1} and the
// linear term sum_t Sigma_t^{-1} R_t, both restricted to the free entries
// (an intercept equal over time pools its occasions). Reads Ystar, B, A,
// the loadings and Sigma; writes the intercepts, hence Nu.
type LagInterceptBlock struct {
	sum     []float64 // T x J: R_t
	prec, h []float64
	r       []float64
}

// NewLagInterceptBlock allocates the block's workspace.
func NewLagInterceptBlock(l *Layout) *LagInterceptBlock {
	n := l.NDyn
	return &LagInterceptBlock{sum: make([]float64, l.T*l.J), prec: make([]float64, n*n), h: make([]float64, n), r: make([]float64, l.J)}
}

// Name implements Block.
func (*LagInterceptBlock) Name() string { return "intercepts of the lagged equation" }

// Writes implements Block.
func (*LagInterceptBlock) Writes() Part { return PartMeans | PartOwn }

// lagResiduals calls fn(t, r) for each occasion t of person i with r =
// zeta_it + c_t: y*_i1 - Lambda b_i, or y*_it - b_i - A_t y*_i,t-1. r is
// scratch of J values.
func lagResiduals(st *State, i int, r []float64, fn func(t int, r []float64)) {
	l := st.L
	J := l.J
	JJ := J * J
	_, lam, _ := st.dynParts()
	off := l.Panel.Offset[i]
	b := st.B[i*J : i*J+J]
	for t := 0; t < l.Panel.Len[i]; t++ {
		y := st.Ystar[off+t*J : off+(t+1)*J]
		for q := 0; q < J; q++ {
			v := y[q]
			if t == 0 {
				for k, bk := range b {
					v -= lam[q*J+k] * bk
				}
			} else {
				v -= b[q]
				a := st.A[t*JJ+q*J : t*JJ+(q+1)*J]
				for k, ak := range a {
					v -= ak * st.Ystar[off+(t-1)*J+k]
				}
			}
			r[q] = v
		}
		fn(t, r)
	}
}

// Update implements Block.
func (lb *LagInterceptBlock) Update(st *State, rng *rand.Rand) error {
	l := st.L
	J, T, n := l.J, l.T, l.NDyn
	JJ := J * J
	if n == 0 {
		return nil
	}
	for k := range lb.sum {
		lb.sum[k] = 0
	}
	buf := lb.r
	for i := 0; i < l.N; i++ {
		lagResiduals(st, i, buf, func(t int, r []float64) {
			for q, v := range r {
				lb.sum[t*J+q] += v
			}
		})
	}
	for k := range lb.prec {
		lb.prec[k] = 0
	}
	iv := 1 / (l.Priors.MeanSD * l.Priors.MeanSD)
	for k := 0; k < n; k++ {
		lb.prec[k*n+k] = iv
		lb.h[k] = 0
	}
	for t := 0; t < T; t++ {
		nt := float64(l.CountAt[t])
		si := st.SigInv[t*JJ : (t+1)*JJ]
		for a := 0; a < J; a++ {
			ia := l.DynIdx[t*J+a]
			if ia < 0 {
				continue
			}
			for b := 0; b < J; b++ {
				lb.h[ia] += si[a*J+b] * lb.sum[t*J+b]
				if ib := l.DynIdx[t*J+b]; ib >= 0 {
					lb.prec[ia*n+ib] += nt * si[a*J+b]
				}
			}
		}
	}
	if !drawCanonical(rng, lb.prec, lb.h, n) {
		return errBlock("intercepts of the lagged equation", "conditional precision is not positive definite")
	}
	c, _, _ := st.dynParts()
	copy(c, lb.h)
	st.SyncNu()
	return nil
}

// matrixRegression draws the free entries (free, indices r*J+c) of a J x J
// matrix B in y = B x + e, e ~ N(0, Sigma), from their normal full
// conditional: with S11 = sum x x' and S01 = sum y x', vec(B) has
// precision (S11 kron Sigma^{-1}) + I/sd^2 and linear term
// vec(Sigma^{-1} S01) + mean/sd^2, restricted to the free entries (the
// multivariate regression of e.g. Zellner 1971, ch. 8). prior gives the
// prior mean of entry k. It writes the draw into dst (J x J; entries not
// free are left alone) and returns false when the precision is not
// positive definite. prec (n x n), h (n) and m (J x J) are scratch.
func matrixRegression(rng *rand.Rand, dst []float64, free []int, s11, s01, si []float64, J int, sd float64, prior func(k int) float64, prec, h, m []float64) bool {
	n := len(free)
	dense.Mul(m, si, s01, J, J, J)
	iv := 1 / (sd * sd)
	for p1, f1 := range free {
		r1, c1 := f1/J, f1%J
		h[p1] = m[r1*J+c1] + iv*prior(f1)
		for p2, f2 := range free {
			r2, c2 := f2/J, f2%J
			prec[p1*n+p2] = s11[c1*J+c2] * si[r1*J+r2]
		}
		prec[p1*n+p1] += iv
	}
	if !drawCanonical(rng, prec, h, n) {
		return false
	}
	for p, f := range free {
		dst[f] = h[p]
	}
	return true
}

// LoadingBlock draws the first occasion's loadings Lambda on the random
// intercepts: the regression of y*_i1 - c_1 on b_i with innovation
// covariance Sigma_1 (matrixRegression; prior normal(1, PathSD^2) on the
// diagonal, normal(0, PathSD^2) off it). Reads Ystar, B, the intercepts
// and Sigma_1; writes the loadings, hence the between parts S_t b_i.
type LoadingBlock struct {
	free          []int
	s11, s01      []float64
	prec, h, m, r []float64
}

// NewLoadingBlock allocates the block's workspace.
func NewLoadingBlock(l *Layout) *LoadingBlock {
	J := l.J
	lb := &LoadingBlock{s11: make([]float64, J*J), s01: make([]float64, J*J), m: make([]float64, J*J), r: make([]float64, J)}
	lb.free = freeIndices(l.LoadFree)
	n := len(lb.free)
	lb.prec, lb.h = make([]float64, n*n), make([]float64, n)
	return lb
}

// Name implements Block.
func (*LoadingBlock) Name() string { return "first-occasion loadings" }

// Writes implements Block.
func (*LoadingBlock) Writes() Part { return PartOwn | PartIntercepts }

// Update implements Block.
func (lb *LoadingBlock) Update(st *State, rng *rand.Rand) error {
	l := st.L
	J := l.J
	c, lam, _ := st.dynParts()
	for k := range lb.s11 {
		lb.s11[k], lb.s01[k] = 0, 0
	}
	for i := 0; i < l.N; i++ {
		off := l.Panel.Offset[i]
		b := st.B[i*J : i*J+J]
		for q := 0; q < J; q++ {
			lb.r[q] = st.Ystar[off+q] - st.dynIntercept(c, 0, q)
		}
		for a := 0; a < J; a++ {
			for k := 0; k < J; k++ {
				lb.s11[a*J+k] += b[a] * b[k]
				lb.s01[a*J+k] += lb.r[a] * b[k]
			}
		}
	}
	prior := func(k int) float64 {
		if k%(J+1) == 0 {
			return 1
		}
		return 0
	}
	if !matrixRegression(rng, lam, lb.free, lb.s11, lb.s01, st.SigInv[:J*J], J, l.Priors.PathSD, prior, lb.prec, lb.h, lb.m) {
		return errBlock("first-occasion loadings", "conditional precision is not positive definite")
	}
	st.SyncNu()
	return nil
}

// LagPathBlock draws the carry-over A_t of the latent response: the
// regression of y*_it - c_t - b_i on y*_i,t-1 with innovation covariance
// Sigma_t (matrixRegression; prior normal(0, PathSD^2)), the occasions
// pooled when paths are equal over time. No stability is imposed: the
// first occasion is given, not stationary. Reads Ystar, B, the
// intercepts and Sigma; writes A, hence Nu and the between parts.
type LagPathBlock struct {
	free          []int
	s11, s01      []float64 // T blocks
	prec, h, m, r []float64
	cur           []float64
}

// NewLagPathBlock allocates the block's workspace.
func NewLagPathBlock(l *Layout) *LagPathBlock {
	J := l.J
	JJ := J * J
	pb := &LagPathBlock{s11: make([]float64, l.T*JJ), s01: make([]float64, l.T*JJ), m: make([]float64, JJ), r: make([]float64, J), cur: make([]float64, JJ)}
	pb.free = freeIndices(l.PathFree)
	n := len(pb.free)
	pb.prec, pb.h = make([]float64, n*n), make([]float64, n)
	return pb
}

// Name implements Block.
func (*LagPathBlock) Name() string { return "carry-over of the latent response" }

// Writes implements Block.
func (*LagPathBlock) Writes() Part { return PartPaths | PartMeans | PartOwn | PartIntercepts }

// Update implements Block.
func (pb *LagPathBlock) Update(st *State, rng *rand.Rand) error {
	l := st.L
	J, T := l.J, l.T
	JJ := J * J
	c, _, _ := st.dynParts()
	for k := range pb.s11 {
		pb.s11[k], pb.s01[k] = 0, 0
	}
	for i := 0; i < l.N; i++ {
		off := l.Panel.Offset[i]
		b := st.B[i*J : i*J+J]
		for t := 1; t < l.Panel.Len[i]; t++ {
			slot := t
			if !l.PathsFree {
				slot = 1
			}
			s11, s01 := pb.s11[slot*JJ:(slot+1)*JJ], pb.s01[slot*JJ:(slot+1)*JJ]
			x := st.Ystar[off+(t-1)*J : off+t*J]
			for q := 0; q < J; q++ {
				pb.r[q] = st.Ystar[off+t*J+q] - st.dynIntercept(c, t, q) - b[q]
			}
			for a := 0; a < J; a++ {
				for k := 0; k < J; k++ {
					s11[a*J+k] += x[a] * x[k]
					s01[a*J+k] += pb.r[a] * x[k]
				}
			}
		}
	}
	last := T - 1
	if !l.PathsFree {
		last = min(1, T-1)
	}
	zero := func(int) float64 { return 0 }
	for t := 1; t <= last; t++ {
		copy(pb.cur, st.A[t*JJ:(t+1)*JJ])
		if !matrixRegression(rng, pb.cur, pb.free, pb.s11[t*JJ:(t+1)*JJ], pb.s01[t*JJ:(t+1)*JJ], st.SigInv[t*JJ:(t+1)*JJ], J, l.Priors.PathSD, zero, pb.prec, pb.h, pb.m) {
			return errBlock("carry-over of the latent response", "conditional precision is not positive definite")
		}
		st.setPaths(t, pb.cur)
	}
	return st.Refresh()
}

// LagLocationBlock makes the location moves of a categorical outcome j
// under a lagged latent response (the analogue of LocationBlock, which
// assumes the residual form). A move translates, by delta, outcome j's
// thresholds and latent responses at every occasion, the random
// intercepts by u delta and the intercepts of the later occasions by v_t
// delta with v_t = (I - A_t) e_j - u; the categories keep their
// intervals, every later innovation zeta_it is unchanged, and the first
// occasion's changes by g delta, g = e_j - Lambda u (c_1 stays 0). Along
// the line the posterior is then Gaussian in delta (the first occasion's
// innovations and the normal priors of thresholds, intercepts and random
// intercepts), drawn exactly (Liu & Sabatti 2000, JASA 95:509;
// translations have Jacobian 1). Two directions per outcome: u =
// Lambda^{-1} e_j (the first occasion unchanged; the level against the
// random intercepts' mean) and u = 0 (the level against the first
// occasion's innovations). A move is made only when every intercept it
// shifts is free, and with intercepts equal over time only when the paths
// are equal too (else v_t would differ between occasions sharing one
// value). Without random intercepts only u = 0 applies. Reads and writes
// Tau, Ystar, B and the intercepts.
type LagLocationBlock struct {
	psiIn, tmp            []float64
	u, g, sg, sumB, sumZ1 []float64
	shift                 []float64
	seen                  []bool
}

// NewLagLocationBlock allocates the block's workspace.
func NewLagLocationBlock(l *Layout) *LagLocationBlock {
	J := l.J
	return &LagLocationBlock{psiIn: make([]float64, J*J), tmp: make([]float64, J*J+J), u: make([]float64, J), g: make([]float64, J),
		sg: make([]float64, J), sumB: make([]float64, J), sumZ1: make([]float64, J), shift: make([]float64, l.NDyn), seen: make([]bool, l.NDyn)}
}

// Name implements Block.
func (*LagLocationBlock) Name() string { return "location moves of the lagged equation" }

// Writes implements Block.
func (*LagLocationBlock) Writes() Part {
	return PartThresholds | PartLatent | PartIntercepts | PartMeans | PartOwn
}

// Update implements Block.
func (lb *LagLocationBlock) Update(st *State, rng *rand.Rand) error {
	l := st.L
	J := l.J
	JJ := J * J
	if !l.MeansFree && l.PathsFree {
		return nil
	}
	_, lam, _ := st.dynParts()
	if l.RI && !dense.Inverse(lb.psiIn, st.Psi, J, lb.tmp[:JJ], lb.tmp[JJ:]) {
		return errBlock("location moves of the lagged equation", "random-intercept covariance is not positive definite")
	}
	first := 0
	if !l.RI {
		first = 1 // no random intercepts to move: u = 0 only
	}
	for j := 0; j < J; j++ {
		if !l.Cat[j] {
			continue
		}
		for dir := first; dir < 2; dir++ {
			for k := range lb.u {
				lb.u[k] = 0
			}
			if dir == 0 {
				lb.u[j] = 1
				if !dense.SolveGeneral(lam, J, lb.u, lb.tmp[:JJ]) {
					continue // a singular Lambda: no move this sweep
				}
			}
			lb.move(st, rng, j, lam)
		}
	}
	return nil
}

// move makes one location move of outcome j along the current u.
func (lb *LagLocationBlock) move(st *State, rng *rand.Rand, j int, lam []float64) {
	l := st.L
	J, T := l.J, l.T
	JJ := J * J
	c, _, _ := st.dynParts()
	for k := range lb.shift {
		lb.shift[k], lb.seen[k] = 0, false
	}
	for t := 1; t < T; t++ {
		for k := 0; k < J; k++ {
			v := -st.A[t*JJ+k*J+j] - lb.u[k]
			if k == j {
				v++
			}
			idx := l.DynIdx[t*J+k]
			switch {
			case idx < 0 && v != 0:
				return
			case idx >= 0 && !lb.seen[idx]:
				lb.seen[idx], lb.shift[idx] = true, v
			}
		}
	}
	for k := 0; k < J; k++ {
		v := 0.0
		for p := 0; p < J; p++ {
			v -= lam[k*J+p] * lb.u[p]
		}
		if k == j {
			v++
		}
		lb.g[k] = v
		lb.sumB[k], lb.sumZ1[k] = 0, 0
	}
	for i := 0; i < l.N; i++ {
		off := l.Panel.Offset[i]
		b := st.B[i*J : i*J+J]
		for k := 0; k < J; k++ {
			lb.sumB[k] += b[k]
			z := st.Ystar[off+k] - st.dynIntercept(c, 0, k)
			for p, bp := range b {
				z -= lam[k*J+p] * bp
			}
			lb.sumZ1[k] += z
		}
	}
	// log density along the line: -(a delta^2 + 2 bq delta)/2.
	n := float64(l.N)
	dense.MulVec(lb.sg, st.SigInv[:JJ], lb.g, J, J)
	a, bq := 0.0, 0.0
	for p := 0; p < J; p++ {
		a += n * lb.sg[p] * lb.g[p]
		bq += lb.sg[p] * lb.sumZ1[p]
		for q := 0; q < J && l.RI; q++ {
			a += n * lb.u[p] * lb.psiIn[p*J+q] * lb.u[q]
			bq += lb.u[p] * lb.psiIn[p*J+q] * lb.sumB[q]
		}
	}
	ivT := 1 / (l.Priors.ThresholdSD * l.Priors.ThresholdSD)
	for _, x := range st.Tau[j] {
		a += ivT
		bq += ivT * x
	}
	ivC := 1 / (l.Priors.MeanSD * l.Priors.MeanSD)
	for k, s := range lb.shift {
		a += ivC * s * s
		bq += ivC * c[k] * s
	}
	if !(a > 0) {
		return
	}
	delta := -bq/a + rng.NormFloat64()/math.Sqrt(a)
	for k := range st.Tau[j] {
		st.Tau[j][k] += delta
	}
	for i := 0; i < l.N; i++ {
		off := l.Panel.Offset[i]
		for t := 0; t < l.Panel.Len[i]; t++ {
			st.Ystar[off+t*J+j] += delta
		}
		for k := 0; k < J; k++ {
			st.B[i*J+k] += lb.u[k] * delta
		}
	}
	for k, s := range lb.shift {
		c[k] += s * delta
	}
	st.SyncNu()
}

// LagShearBlock moves each free carry-over entry A[r,k] together with the
// random intercepts of outcome r. In the dynamic form a person's level
// is about b_i / (1 - A), so A and the b_i are strongly dependent and the
// Gibbs blocks, drawing one given the other, move slowly along their ridge.
// The move shifts A[r,k] (at the path occasion s, or every occasion when
// paths are equal) by eps and every b_ir by -eps mu_ik, mu_ik the mean of
// y*_i,k,t-1 over person i's occasions t that use A_s: a translation of
// the (A, b) coordinates with the latent responses fixed (Jacobian 1).
// Every innovation is linear in eps, so along this line the posterior is
// Gaussian and eps is drawn exactly (a generalized Gibbs step, Liu &
// Sabatti 2000, JASA 95:509). Reads Ystar, B, A, the intercepts, the
// loadings, Sigma and Psi; writes A and B, hence Nu and the between parts.
type LagShearBlock struct {
	free                    []int
	psiIn, tmp, zeta, d, sd []float64
	mu                      []float64 // N: mu_ik for the current entry
	cur                     []float64
}

// NewLagShearBlock allocates the block's workspace.
func NewLagShearBlock(l *Layout) *LagShearBlock {
	J := l.J
	sb := &LagShearBlock{psiIn: make([]float64, J*J), tmp: make([]float64, J*J+J), zeta: make([]float64, J), d: make([]float64, J),
		sd: make([]float64, J), mu: make([]float64, l.N), cur: make([]float64, J*J)}
	sb.free = freeIndices(l.PathFree)
	return sb
}

// Name implements Block.
func (*LagShearBlock) Name() string { return "carry-over and random-intercept shears" }

// Writes implements Block.
func (*LagShearBlock) Writes() Part { return PartPaths | PartIntercepts | PartMeans | PartOwn }

// Update implements Block.
func (sb *LagShearBlock) Update(st *State, rng *rand.Rand) error {
	l := st.L
	J := l.J
	if !dense.Inverse(sb.psiIn, st.Psi, J, sb.tmp[:J*J], sb.tmp[J*J:]) {
		return errBlock("carry-over and random-intercept shears", "random-intercept covariance is not positive definite")
	}
	for _, s := range l.pathOccasions() {
		for _, f := range sb.free {
			if err := sb.move(st, rng, s, f/J, f%J); err != nil {
				return err
			}
		}
	}
	return nil
}

// uses reports whether occasion t's innovation uses the paths of path
// occasion s.
func (sb *LagShearBlock) uses(l *Layout, s, t int) bool {
	return t >= 1 && (!l.PathsFree || t == s)
}

// move makes the shear of entry (r, k) of the paths of path occasion s.
func (sb *LagShearBlock) move(st *State, rng *rand.Rand, s, r, k int) error {
	l := st.L
	J := l.J
	JJ := J * J
	c, lam, _ := st.dynParts()
	aq, bq := 0.0, 0.0
	for i := 0; i < l.N; i++ {
		off := l.Panel.Offset[i]
		Ti := l.Panel.Len[i]
		n, sum := 0, 0.0
		for t := 1; t < Ti; t++ {
			if sb.uses(l, s, t) {
				n++
				sum += st.Ystar[off+(t-1)*J+k]
			}
		}
		sb.mu[i] = 0
		if n == 0 {
			continue
		}
		mu := sum / float64(n)
		sb.mu[i] = mu
		b := st.B[i*J : i*J+J]
		for t := 0; t < Ti; t++ {
			y := st.Ystar[off+t*J : off+(t+1)*J]
			for q := 0; q < J; q++ {
				v := y[q] - st.dynIntercept(c, t, q)
				if t == 0 {
					for p, bp := range b {
						v -= lam[q*J+p] * bp
					}
					sb.d[q] = lam[q*J+r] * mu
				} else {
					v -= b[q]
					for p := 0; p < J; p++ {
						v -= st.A[t*JJ+q*J+p] * st.Ystar[off+(t-1)*J+p]
					}
					sb.d[q] = 0
				}
				sb.zeta[q] = v
			}
			if t > 0 {
				sb.d[r] = mu
				if sb.uses(l, s, t) {
					sb.d[r] -= st.Ystar[off+(t-1)*J+k]
				}
			}
			si := st.SigInv[t*JJ : (t+1)*JJ]
			dense.MulVec(sb.sd, si, sb.d, J, J)
			for q := 0; q < J; q++ {
				aq += sb.sd[q] * sb.d[q]
				bq += sb.sd[q] * sb.zeta[q]
			}
		}
		// The random intercepts' prior: b_i - eps mu e_r.
		pb := 0.0
		for p, bp := range b {
			pb += sb.psiIn[r*J+p] * bp
		}
		aq += mu * mu * sb.psiIn[r*J+r]
		bq -= mu * pb
	}
	iv := 1 / (l.Priors.PathSD * l.Priors.PathSD)
	a0 := st.A[s*JJ+r*J+k]
	aq += iv
	bq += iv * a0
	if !(aq > 0) {
		return nil
	}
	eps := -bq/aq + rng.NormFloat64()/math.Sqrt(aq)
	copy(sb.cur, st.A[s*JJ:(s+1)*JJ])
	sb.cur[r*J+k] = a0 + eps
	st.setPaths(s, sb.cur)
	for i := 0; i < l.N; i++ {
		st.B[i*J+r] -= eps * sb.mu[i]
	}
	return st.Refresh()
}

// freeIndices returns the indices k where mask[k] is true.
func freeIndices(mask []bool) []int {
	var out []int
	for k, f := range mask {
		if f {
			out = append(out, k)
		}
	}
	return out
}

// drawCanonical overwrites h with a draw from N(Q^{-1} h, Q^{-1}), Q the
// n x n precision in prec (overwritten by its Cholesky factor L): solve
// L u = h, add standard normals, solve L' x = u + z. It returns false
// when Q is not positive definite.
func drawCanonical(rng *rand.Rand, prec, h []float64, n int) bool {
	if !dense.Cholesky(prec, n) {
		return false
	}
	dense.SolveLower(prec, n, h)
	for k := range h[:n] {
		h[k] += rng.NormFloat64()
	}
	dense.SolveUpperT(prec, n, h)
	return true
}
