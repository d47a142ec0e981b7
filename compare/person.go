package compare

import (
	"context"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"sync"
	"sync/atomic"

	"github.com/lagstar/lagstar/internal/dense"
	"github.com/lagstar/lagstar/sampler"
)

// LogLik returns the person-level log likelihoods log p(y_i | theta) for
// every draw (rows) and person (columns), with the random intercepts and
// within paths integrated out: y*_i is normal with mean nu and covariance
// Psi on every pair of occasions (under growth the mean and covariance of
// the growth line, State.CellMean and State.BetweenCov) plus the VAR(1)
// covariance of w, and y_i
// is the event that each observed y* lies in its category's interval, a
// rectangle probability estimated by GHK with R randomized quasi-random
// points (RandomizedPoints: ten shifted Halton sets padded with random
// coordinates; the same points for every draw: common random numbers). Observed continuous values enter through their normal
// density (on the data's own scale) times the rectangle probability of the
// categorical latent responses given them (the conditional normal), so
// the likelihood is exact for continuous outcomes alone. It also returns
// the median relative Monte Carlo standard error of the GHK averages,
// estimated from the ten sets. Only
// models whose outcomes are all categorical are supported.
func LogLik(l *sampler.Layout, draws [][]float64, R int) ([][]float64, float64, error) {
	return LogLikProgress(l, draws, R, nil)
}

// LogLikProgress is LogLik that reports the draws done to progress (done,
// total; called from several goroutines) when progress is not nil.
func LogLikProgress(l *sampler.Layout, draws [][]float64, R int, progress func(done, total int)) ([][]float64, float64, error) {
	return LogLikContext(context.Background(), l, draws, R, progress)
}

// LogLikContext is LogLikProgress that stops with ctx's error, between
// two draws, when ctx is cancelled.
func LogLikContext(ctx context.Context, l *sampler.Layout, draws [][]float64, R int, progress func(done, total int)) ([][]float64, float64, error) {
	u := RandomizedPoints(R, l.MaxLen*l.J, ghkSets, 20261202)
	out := make([][]float64, len(draws))
	rel := make([][]float64, len(draws))
	errs := make([]error, len(draws))
	workers := runtime.GOMAXPROCS(0)
	var wg sync.WaitGroup
	var done atomic.Int64
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func(w int) {
			defer wg.Done()
			st := sampler.NewState(l, rand.New(rand.NewPCG(1, 2))) // starting values are overwritten
			pw := newPersonWork(l)
			for d := w; d < len(draws); d += workers {
				if err := ctx.Err(); err != nil {
					errs[d] = err
					return
				}
				if err := st.Inject(draws[d]); err != nil {
					errs[d] = err
					continue
				}
				out[d], rel[d] = make([]float64, l.N), make([]float64, l.N)
				pw.prepare(st)
				for i := 0; i < l.N; i++ {
					out[d][i], rel[d][i] = pw.person(st, i, u)
				}
				if progress != nil {
					progress(int(done.Add(1)), len(draws))
				}
			}
		}(w)
	}
	wg.Wait()
	for _, e := range errs {
		if e != nil {
			return nil, 0, e
		}
	}
	var all []float64
	for _, r := range rel {
		all = append(all, r...)
	}
	return out, median(all), nil
}

// ghkSets is the number of independently shifted point sets of GHK.
const ghkSets = 10

type personWork struct {
	v                  []float64 // T blocks of J x J: Var(w_t)
	blocks             []float64 // T x T blocks of J x J: Cov(w_t2, w_t1) for t1 <= t2
	cov, chol          []float64 // n x n
	mu, lo, hi, e, tmp []float64
	idx                []int
	// Continuous cells: their positions among the observed cells, the
	// residuals y - mu, and S_cc^{-1} S_ck column by column.
	cont, cat []int
	res, col  []float64
	sck       []float64
}

func newPersonWork(l *sampler.Layout) *personWork {
	n := l.MaxLen * l.J
	return &personWork{v: make([]float64, l.T*l.J*l.J), blocks: make([]float64, l.T*l.T*l.J*l.J), cov: make([]float64, n*n), chol: make([]float64, n*n),
		mu: make([]float64, n), lo: make([]float64, n), hi: make([]float64, n), e: make([]float64, n), tmp: make([]float64, l.J*l.J), idx: make([]int, n),
		cont: make([]int, 0, n), cat: make([]int, 0, n), res: make([]float64, n), col: make([]float64, n), sck: make([]float64, n*n)}
}

// prepare computes the within-path covariances of the draw: V_1 = Sigma_1,
// V_t = A_t V_{t-1} A_t' + Sigma_t, and Cov(w_t2, w_t1) = A_t2 Cov(w_t2-1, w_t1).
func (pw *personWork) prepare(st *sampler.State) {
	l := st.L
	J, T := l.J, l.T
	JJ := J * J
	if l.MA {
		st.WithinCovariances(pw.v, pw.blocks, pw.tmp)
		return
	}
	copy(pw.v[:JJ], st.Sig[:JJ])
	for t := 1; t < T; t++ {
		dense.Mul(pw.tmp, st.A[t*JJ:(t+1)*JJ], pw.v[(t-1)*JJ:t*JJ], J, J, J)
		dense.MulBT(pw.v[t*JJ:(t+1)*JJ], pw.tmp, st.A[t*JJ:(t+1)*JJ], J, J, J)
		for k := 0; k < JJ; k++ {
			pw.v[t*JJ+k] += st.Sig[t*JJ+k]
		}
	}
	for t1 := 0; t1 < T; t1++ {
		copy(pw.blocks[(t1*T+t1)*JJ:(t1*T+t1+1)*JJ], pw.v[t1*JJ:(t1+1)*JJ])
		for t2 := t1 + 1; t2 < T; t2++ {
			dense.Mul(pw.blocks[(t1*T+t2)*JJ:(t1*T+t2+1)*JJ], st.A[t2*JJ:(t2+1)*JJ], pw.blocks[(t1*T+t2-1)*JJ:(t1*T+t2)*JJ], J, J, J)
		}
	}
}

// person returns log p(y_i | theta) and the GHK relative standard error.
func (pw *personWork) person(st *sampler.State, i int, u Points) (float64, float64) {
	l := st.L
	J := l.J
	JJ := J * J
	off := l.Panel.Offset[i]
	T := l.Panel.Len[i]
	// Observed cells.
	n := 0
	for c := 0; c < T*J; c++ {
		if y := st.Y[off+c]; y == y {
			pw.idx[n] = c
			n++
		}
	}
	if n == 0 {
		return 0, 0
	}
	// cov(w_t[a], w_s[b]) for s >= t: (A_s ... A_{t+1} V_t)[b][a].
	for p := 0; p < n; p++ {
		cp := pw.idx[p]
		tp, ap := cp/J, cp%J
		for r := 0; r <= p; r++ {
			cr := pw.idx[r]
			tr, ar := cr/J, cr%J
			// Occasions: tr <= tp since cells are in (t, j) order.
			c := pw.blocks[(tr*l.T+tp)*JJ+ap*J+ar]
			c += st.BetweenCov(tp, ap, tr, ar)
			pw.cov[p*n+r], pw.cov[r*n+p] = c, c
		}
		j := cp % J
		pw.mu[p] = st.CellMean(tp, j)
		pw.lo[p], pw.hi[p] = math.Inf(-1), math.Inf(1)
		if !l.Cat[j] {
			continue
		}
		k := int(st.Y[off+cp])
		if k > 0 {
			pw.lo[p] = st.Tau[j][k-1]
		}
		if k < len(st.Tau[j]) {
			pw.hi[p] = st.Tau[j][k]
		}
	}
	pw.cont, pw.cat = pw.cont[:0], pw.cat[:0]
	for p := 0; p < n; p++ {
		if l.Cat[pw.idx[p]%J] {
			pw.cat = append(pw.cat, p)
		} else {
			pw.cont = append(pw.cont, p)
		}
	}
	if len(pw.cont) == 0 {
		copy(pw.chol, pw.cov[:n*n])
		if !dense.Cholesky(pw.chol, n) {
			return math.Inf(-1), math.Inf(1)
		}
		return GHK(pw.mu[:n], pw.chol[:n*n], pw.lo[:n], pw.hi[:n], n, u, pw.e)
	}
	return pw.mixed(st, off, n, u)
}

// mixed returns log p(y_i | theta) and the GHK relative standard error
// for a person with observed continuous values: log N(y_c; mu_c, S_cc) on
// the data's scale, plus log P(categorical latent responses in their
// intervals | y_c) from the conditional normal (mean mu_k + S_kc S_cc^{-1}
// (y_c - mu_c), covariance S_kk - S_kc S_cc^{-1} S_ck).
func (pw *personWork) mixed(st *sampler.State, off, n int, u Points) (float64, float64) {
	l := st.L
	J := l.J
	nc, nk := len(pw.cont), len(pw.cat)
	// Cholesky of S_cc in chol (nc x nc).
	cc := pw.chol[:nc*nc]
	for a, pa := range pw.cont {
		for b, pb := range pw.cont {
			cc[a*nc+b] = pw.cov[pa*n+pb]
		}
	}
	if !dense.Cholesky(cc, nc) {
		return math.Inf(-1), math.Inf(1)
	}
	// Whitened residuals L^{-1}(y_c - mu_c) give the quadratic form.
	res := pw.res[:nc]
	logLik := 0.0
	for a, pa := range pw.cont {
		c := pw.idx[pa]
		res[a] = st.Y[off+c] - pw.mu[pa]
		// Jacobian of the standardization: densities on the data's scale.
		logLik -= math.Log(l.Scale[c%J])
	}
	dense.SolveLower(cc, nc, res)
	for a := 0; a < nc; a++ {
		logLik -= 0.5*res[a]*res[a] + math.Log(cc[a*nc+a]) + 0.5*math.Log(2*math.Pi)
	}
	if nk == 0 {
		return logLik, 0
	}
	// S_cc^{-1} (y_c - mu_c) for the conditional mean.
	dense.SolveUpperT(cc, nc, res)
	// S_cc^{-1} S_ck, one categorical cell (column) at a time.
	sck := pw.sck[:nc*nk]
	col := pw.col[:nc]
	for b, pb := range pw.cat {
		for a, pa := range pw.cont {
			col[a] = pw.cov[pa*n+pb]
		}
		dense.SolveLower(cc, nc, col)
		dense.SolveUpperT(cc, nc, col)
		for a := range col {
			sck[a*nk+b] = col[a]
		}
	}
	// Conditional covariance (after S_cc's factor in chol) and mean (in
	// col) of the categorical cells.
	for b, pb := range pw.cat {
		for b2, pb2 := range pw.cat {
			v := pw.cov[pb*n+pb2]
			for a, pa := range pw.cont {
				v -= pw.cov[pb*n+pa] * sck[a*nk+b2]
			}
			pw.chol[nc*nc+b*nk+b2] = v
		}
		m := pw.mu[pb]
		for a, pa := range pw.cont {
			m += pw.cov[pb*n+pa] * res[a]
		}
		pw.col[b] = m
	}
	kc := pw.chol[nc*nc : nc*nc+nk*nk]
	if !dense.Cholesky(kc, nk) {
		return math.Inf(-1), math.Inf(1)
	}
	// Pack the categorical bounds into the first nk entries: the b-th
	// categorical cell sits at position pb >= b, so no entry is overwritten
	// before it is read.
	mu, lo, hi := pw.col[:nk], pw.lo, pw.hi
	for b, pb := range pw.cat {
		lo[b], hi[b] = pw.lo[pb], pw.hi[pb]
	}
	lp, rel := GHK(mu, kc, lo[:nk], hi[:nk], nk, u, pw.e)
	return logLik + lp, rel
}

func median(x []float64) float64 {
	if len(x) == 0 {
		return math.NaN()
	}
	s := slices.Clone(x)
	slices.Sort(s)
	return s[len(s)/2]
}
