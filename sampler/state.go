package sampler

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/lagstar/lagstar/internal/dense"
	"github.com/lagstar/lagstar/latentresp"
)

// State is one chain's current values. Cell (i, t, j) of Ystar is at
// Offset[i]+t*J+j as in model.Panel. The within-person part is not stored:
// w = Ystar - Nu - B is recomputed where needed. Matrices are row-major J x J.
type State struct {
	L *Layout

	Ystar []float64   // latent responses (continuous outcomes: standardized data)
	Y     []float64   // data on the analysis scale (categories, standardized values, NaN)
	B     []float64   // random intercepts, N x J
	Tau   [][]float64 // thresholds per outcome (nil for continuous)
	Mean  []float64   // free mean parameters (Layout.MeanIdx)
	Nu    []float64   // occasion means, T x J, from Mean
	A     []float64   // carry-over, T blocks of J x J; block 0 unused
	// M holds the moving-average coefficients M_t (diagonal, T x J):
	// w_t = A_t w_{t-1} + zeta_t + M_t zeta_{t-1}; zero at t < 2 (the
	// first occasion is not an innovation) and in models without the term.
	M   []float64
	SD  [][]float64 // per covariance group: standard deviations
	R   [][]float64 // per covariance group: correlation matrix
	Sig []float64   // Sigma_t, T blocks (block 0: first occasion)
	Psi []float64   // random-intercept covariance (growth: of intercepts then slopes, 2J x 2J)
	// Growth (term_growth.go): G holds the random slopes (N x J) and
	// GMean the means of the intercepts and slopes (2J); both live in
	// the growth term's own storage. nil without growth.
	G, GMean []float64
	// Load holds the between loadings S_t (T blocks of J x J) of the
	// lagged latent response (term_dynamic.go): the between part at
	// occasion t is S_t b_i. A cache of the term's values and A
	// (syncDyn); nil without the term.
	Load []float64

	// Caches refreshed by Refresh.
	SigInv []float64 // Sigma_t^{-1}
	LBlk   []float64 // -Sigma_t^{-1} A_t: the (t, t-1) block of the path precision
	DMid   []float64 // Sigma_t^{-1} + A_{t+1}' Sigma_{t+1}^{-1} A_{t+1}
	LogDet []float64 // log det Sigma_t
	// Conditional sd and inverse precision of a single latent response at
	// occasion t (T x J), for a person who goes on after t (Mid) or stops
	// at t (Last).
	MidSD, MidInv, LastSD, LastInv []float64

	// WQuad[j*J+k] = sum over persons and occasions of v_j' Sigma_t^{-1} v_k,
	// v_j = e_j w_tj - A_t[:, j] w_{t-1,j} being outcome j's share of the
	// innovation zeta_t (so sum_jk WQuad = sum zeta' Sigma^{-1} zeta). The
	// latent block fills it in its own pass; WQuadOK says it matches the
	// current latent responses, random intercepts, means, paths and
	// covariances. Blocks that change any of these clear WQuadOK.
	WQuad   []float64
	WQuadOK bool

	// Mom holds the within paths' second moments (moments.go); blocks that
	// change Ystar, Nu or B mark it stale.
	Mom *Moments

	// ShardRng holds one random stream per shard of persons (shard.go).
	ShardRng []*rand.Rand
	shardSrc []*rand.PCG
	// Per-shard scratch and partial sums of withinQuad.
	quadW, quadZ [][]float64
	quadPart     []float64

	// own[k] holds the values of the layout's k-th term when it keeps them
	// here (OwnValues; State.Own).
	own [][]float64

	Warmup bool // adaptation allowed
	work   []float64
}

// NewState allocates a state and sets over-dispersed starting values drawn
// from rng.
func NewState(l *Layout, rng *rand.Rand) *State {
	J, T, N := l.J, l.T, l.N
	s := &State{L: l,
		Ystar: make([]float64, len(l.Panel.Y)), Y: make([]float64, len(l.Panel.Y)),
		B: make([]float64, N*J), Tau: make([][]float64, J), Mean: make([]float64, l.NMean),
		Nu: make([]float64, T*J), A: make([]float64, T*J*J), M: make([]float64, T*J), Sig: make([]float64, T*J*J),
		Psi: make([]float64, l.NF()*l.NF()), SigInv: make([]float64, T*J*J), LBlk: make([]float64, T*J*J),
		DMid: make([]float64, T*J*J), LogDet: make([]float64, T), work: make([]float64, 6*J*J+2*J),
		WQuad: make([]float64, J*J),
		MidSD: make([]float64, T*J), MidInv: make([]float64, T*J), LastSD: make([]float64, T*J), LastInv: make([]float64, T*J),
	}
	for c, v := range l.Panel.Y {
		j := c % J
		if !l.Cat[j] && !math.IsNaN(v) {
			v = (v - l.Center[j]) / l.Scale[j]
		}
		s.Y[c] = v
	}
	// Allocated at neutral values; the terms draw their starting values
	// in draw order (registry.go), the shard streams being split off the
	// chain's stream after the terms below shardSplit.
	s.SD = make([][]float64, len(l.Groups))
	s.R = make([][]float64, len(l.Groups))
	for g := range l.Groups {
		s.SD[g] = make([]float64, J)
		s.R[g] = make([]float64, J*J)
		dense.Identity(s.R[g], J)
		for j := range s.SD[g] {
			s.SD[g][j] = 1
		}
	}
	for j := range s.Tau {
		if l.Cat[j] {
			s.Tau[j] = make([]float64, l.K[j]-1)
		}
	}
	s.own = make([][]float64, len(l.Terms))
	for k, t := range l.Terms {
		if o, ok := t.(OwnValues); ok {
			s.own[k] = make([]float64, o.OwnSize(l))
		}
	}
	if l.Growth {
		o := s.Own(growthTerm{})
		s.GMean, s.G = o[:2*J], o[2*J:]
	}
	if l.Dyn {
		s.Load = make([]float64, T*J*J)
	}
	s.Mom = newMoments(l)
	s.quadW, s.quadZ, s.quadPart = shardBufs(l, l.MaxLen*J), shardBufs(l, max(J, l.MaxLen*J)), make([]float64, len(l.ShardStart)-1)
	split := false
	for _, e := range drawOrder(l) {
		if !split && e.draw >= shardSplit {
			s.ShardRng, s.shardSrc = shardRngs(rng, len(l.ShardStart)-1)
			split = true
		}
		e.term.Start(s, rng)
	}
	if !split {
		s.ShardRng, s.shardSrc = shardRngs(rng, len(l.ShardStart)-1)
	}
	s.SyncNu()
	if err := s.Refresh(); err != nil {
		panic("sampler: starting values not valid: " + err.Error())
	}
	// Latent responses: draws inside each observed category given the
	// starting thresholds and means.
	for i := 0; i < N; i++ {
		off := l.Panel.Offset[i]
		for t := 0; t < l.Panel.Len[i]; t++ {
			for j := 0; j < J; j++ {
				c := off + t*J + j
				v := s.Y[c]
				mu := s.Nu[t*J+j]
				switch {
				case math.IsNaN(v):
					s.Ystar[c] = mu + rng.NormFloat64()
				case l.Cat[j]:
					lo, hi := s.interval(j, int(v))
					s.Ystar[c] = latentresp.TruncNormal(rng, mu, 1, lo, hi)
				default:
					s.Ystar[c] = v
				}
			}
		}
	}
	return s
}

// interval returns the threshold interval of category k of outcome j.
func (s *State) interval(j, k int) (float64, float64) {
	tau := s.Tau[j]
	lo, hi := math.Inf(-1), math.Inf(1)
	if k > 0 {
		lo = tau[k-1]
	}
	if k < len(tau) {
		hi = tau[k]
	}
	return lo, hi
}

// SyncNu recomputes the occasion means Nu from the free mean parameters Mean.
func (s *State) SyncNu() {
	s.WQuadOK = false
	s.Mom.ok = false
	if s.L.Dyn {
		s.syncDyn()
		return
	}
	for i, idx := range s.L.MeanIdx {
		if idx >= 0 {
			s.Nu[i] = s.Mean[idx]
		} else {
			s.Nu[i] = 0
		}
	}
}

// groupCov writes the covariance D R D of group g into dst.
func (s *State) groupCov(dst []float64, g int) {
	J := s.L.J
	sd, r := s.SD[g], s.R[g]
	for a := 0; a < J; a++ {
		for b := 0; b < J; b++ {
			dst[a*J+b] = sd[a] * r[a*J+b] * sd[b]
		}
	}
}

// Refresh recomputes Sigma_t and the precision blocks from the parameters.
// It returns an error when a matrix is not positive definite or the
// carry-over is not stable under a stationary start.
func (s *State) Refresh() error {
	s.WQuadOK = false
	l := s.L
	if l.Dyn {
		// m_t and S_t follow the carry-over (the blocks that change it
		// declare the means changed, so the moments go stale).
		s.syncDyn()
	}
	J, T := l.J, l.T
	JJ := J * J
	for t := 0; t < T; t++ {
		g := l.GroupOf[t]
		if g >= 0 {
			s.groupCov(s.Sig[t*JJ:(t+1)*JJ], g)
		}
	}
	if l.GroupOf[0] == -1 {
		if !stationaryCov(s.Sig[:JJ], s.A[JJ:2*JJ], s.Sig[JJ:2*JJ], J, s.work) {
			return fmt.Errorf("carry-over matrix is not stable; no stationary distribution")
		}
	}
	chol, w := s.work[:JJ], s.work[JJ:JJ+J]
	for t := 0; t < T; t++ {
		copy(chol, s.Sig[t*JJ:(t+1)*JJ])
		if !dense.Cholesky(chol, J) {
			return fmt.Errorf("covariance at occasion %d is not positive definite", l.Panel.Occasions[t])
		}
		s.LogDet[t] = dense.LogDetChol(chol, J)
		dense.InverseFromChol(s.SigInv[t*JJ:(t+1)*JJ], chol, J, w)
	}
	tmp := s.work[2*JJ : 3*JJ]
	for t := 0; t < T; t++ {
		si := s.SigInv[t*JJ : (t+1)*JJ]
		if t > 0 {
			dense.Mul(s.LBlk[t*JJ:(t+1)*JJ], si, s.A[t*JJ:(t+1)*JJ], J, J, J)
			for k := t * JJ; k < (t+1)*JJ; k++ {
				s.LBlk[k] = -s.LBlk[k]
			}
		}
		d := s.DMid[t*JJ : (t+1)*JJ]
		copy(d, si)
		if t+1 < T {
			// A' Sigma^{-1} A = -A' * LBlk[t+1]
			an := s.A[(t+1)*JJ : (t+2)*JJ]
			sn := s.SigInv[(t+1)*JJ : (t+2)*JJ]
			dense.Mul(tmp, sn, an, J, J, J)
			for a := 0; a < J; a++ {
				for b := 0; b < J; b++ {
					v := 0.0
					for k := 0; k < J; k++ {
						v += an[k*J+a] * tmp[k*J+b]
					}
					d[a*J+b] += v
				}
			}
		}
		for j := 0; j < J; j++ {
			pm, pl := d[j*J+j], si[j*J+j]
			s.MidInv[t*J+j], s.MidSD[t*J+j] = 1/pm, 1/math.Sqrt(pm)
			s.LastInv[t*J+j], s.LastSD[t*J+j] = 1/pl, 1/math.Sqrt(pl)
		}
	}
	return nil
}

// stationaryCov solves v = a v a' + s after checking stability.
func stationaryCov(v, a, s []float64, J int, work []float64) bool {
	w := work[3*J*J : 6*J*J]
	if !dense.SpectralRadiusBelowOne(a, J, w) {
		return false
	}
	return dense.StationaryCov(v, a, s, J, w)
}

// fillW writes person i's within part w = Ystar - Nu - B into w.
func (s *State) fillW(w []float64, i int, ys []float64) {
	l := s.L
	J := l.J
	off := l.Panel.Offset[i]
	b := s.B[i*J : i*J+J]
	if s.Load != nil {
		for t := 0; t < l.Panel.Len[i]; t++ {
			c := t * J
			ld := s.Load[c*J : (c+J)*J]
			for j := 0; j < J; j++ {
				v := ys[off+c+j] - s.Nu[c+j]
				for k, bk := range b {
					v -= ld[j*J+k] * bk
				}
				w[c+j] = v
			}
		}
		return
	}
	if s.G != nil {
		g := s.G[i*J : i*J+J]
		for t := 0; t < l.Panel.Len[i]; t++ {
			c, tm := t*J, l.Time[t]
			for j, bj := range b {
				w[c+j] = ys[off+c+j] - s.Nu[c+j] - bj - tm*g[j]
			}
		}
		return
	}
	for t := 0; t < l.Panel.Len[i]; t++ {
		c := t * J
		for j, bj := range b {
			w[c+j] = ys[off+c+j] - s.Nu[c+j] - bj
		}
	}
}

// between returns person i's between part of outcome j at grid occasion
// t: the random intercept, plus the slope times the time score under
// growth.
func (s *State) between(i, t, j int) float64 {
	J := s.L.J
	if s.G != nil {
		return s.B[i*J+j] + s.L.Time[t]*s.G[i*J+j]
	}
	if s.Load != nil {
		ld := s.Load[(t*J+j)*J : (t*J+j+1)*J]
		v := 0.0
		for k, x := range ld {
			v += x * s.B[i*J+k]
		}
		return v
	}
	return s.B[i*J+j]
}

// CellMean returns the model's mean of the latent response of outcome j
// at grid occasion t over persons: the occasion mean, or under growth
// the mean intercept plus the mean slope times the time score.
func (s *State) CellMean(t, j int) float64 {
	if s.G != nil {
		return s.Nu[t*s.L.J+j] + s.GMean[j] + s.L.Time[t]*s.GMean[s.L.J+j]
	}
	return s.Nu[t*s.L.J+j]
}

// BetweenCov returns the covariance of the between parts of outcome a at
// grid occasion t1 and outcome b at t2: Psi[a,b] with random intercepts,
// z_t1' Psi_ab z_t2 (z_t = (1, s_t)) under growth, 0 without.
func (s *State) BetweenCov(t1, a, t2, b int) float64 {
	l := s.L
	if !l.RI {
		return 0
	}
	if s.Load != nil {
		// (S_t1 Psi S_t2')[a, b]
		J := l.J
		r1, r2 := s.Load[(t1*J+a)*J:(t1*J+a+1)*J], s.Load[(t2*J+b)*J:(t2*J+b+1)*J]
		v := 0.0
		for p, x := range r1 {
			for q, y := range r2 {
				v += x * s.Psi[p*J+q] * y
			}
		}
		return v
	}
	if s.G == nil {
		return s.Psi[a*l.J+b]
	}
	n, J := 2*l.J, l.J
	s1, s2 := l.Time[t1], l.Time[t2]
	return s.Psi[a*n+b] + s2*s.Psi[a*n+J+b] + s1*s.Psi[(J+a)*n+b] + s1*s2*s.Psi[(J+a)*n+J+b]
}

// withinQuad returns -1/2 sum_t zeta_t' Sigma_t^{-1} zeta_t over all persons
// for latent responses ys: the part of the log density of the within paths
// that depends on ys (the log-determinant terms do not). Shards run in
// parallel and are summed in shard order.
func (s *State) withinQuad(ys []float64) float64 {
	l := s.L
	if len(l.ShardStart) == 2 {
		s.quadShard(ys, 0, 0, l.N)
	} else {
		forShards(l, func(sh, lo, hi int) { s.quadShard(ys, sh, lo, hi) })
	}
	total := 0.0
	for _, v := range s.quadPart {
		total += v
	}
	return -0.5 * total
}

func (s *State) quadShard(ys []float64, sh, lo, hi int) {
	l := s.L
	J := l.J
	JJ := J * J
	w, z := s.quadW[sh], s.quadZ[sh]
	total := 0.0
	if l.MA {
		for i := lo; i < hi; i++ {
			s.fillW(w, i, ys)
			Ti := l.Panel.Len[i]
			s.innovationsInto(z, w, Ti)
			for t := 0; t < Ti; t++ {
				total += dense.Quad(s.SigInv[t*JJ:(t+1)*JJ], z[t*J:(t+1)*J], J)
			}
		}
		s.quadPart[sh] = total
		return
	}
	for i := lo; i < hi; i++ {
		s.fillW(w, i, ys)
		for t := 0; t < l.Panel.Len[i]; t++ {
			wt := w[t*J : t*J+J]
			if t == 0 {
				copy(z, wt)
			} else {
				a := s.A[t*JJ : (t+1)*JJ]
				wp := w[(t-1)*J : t*J]
				for r := 0; r < J; r++ {
					v := wt[r]
					for c := 0; c < J; c++ {
						v -= a[r*J+c] * wp[c]
					}
					z[r] = v
				}
			}
			total += dense.Quad(s.SigInv[t*JJ:(t+1)*JJ], z, J)
		}
	}
	s.quadPart[sh] = total
}
