package sampler

import (
	"math"
	"math/rand/v2"
	"slices"
)

// LevelBlock removes the slow drift between a categorical outcome's
// thresholds and its free occasion means. With means free over time, the
// data fix the thresholds only through the occasion whose mean is 0 (the
// anchor): thresholds and every other mean can move together, but a
// Gibbs sweep moves them one conditional at a time. For each categorical
// outcome j with free means the block draws a translation c exactly from
// its conditional along the group of moves (Liu & Sabatti 2000, JASA
// 95:509): thresholds, every latent response of j and every free mean of j
// move by +c. Every observed category keeps its interval, and the
// Jacobian of a translation is 1. The within part w = y* - nu - b is
// unchanged where the mean moved with y*, and moves by +c e_j at the
// occasions F_j whose mean is fixed (the anchor, and occasions nobody
// answered), so each innovation r_it = w_it - A_t w_i,t-1 moves by c d_t
// with d_t = [t in F_j] e_j - [t-1 in F_j] A_t e_j: zero except next to
// F_j. The log density in c is therefore Gaussian: the thresholds' and
// means' normal priors plus -1/2 sum_i sum_t (r_it + c d_t)' Sigma_t^{-1}
// (r_it + c d_t), which needs only the sums over persons of r_it at the
// few occasions where d_t is not zero. Reads and writes Tau, Ystar, Mean,
// Nu; reads B, A and SigInv.
type LevelBlock struct {
	meansOf [][]int  // free mean parameters of each categorical outcome
	fixed   [][]bool // fixed[j][t]: outcome j's mean at occasion t is fixed
	occs    []int    // occasions where some outcome's d_t can be non-zero
	rsum    []float64
	w, wp   []float64 // J scratch: w_t and w_t-1 of one person
	d, u    []float64 // J scratch
}

// NewLevelBlock allocates the block's workspace.
func NewLevelBlock(l *Layout) *LevelBlock {
	J, T := l.J, l.T
	lb := &LevelBlock{meansOf: make([][]int, J), fixed: make([][]bool, J), rsum: make([]float64, T*J),
		w: make([]float64, J), wp: make([]float64, J), d: make([]float64, J), u: make([]float64, J)}
	for j := 0; j < J; j++ {
		if !l.Cat[j] {
			continue
		}
		lb.fixed[j] = make([]bool, T)
		for t := 0; t < T; t++ {
			if idx := l.MeanIdx[t*J+j]; idx >= 0 {
				lb.meansOf[j] = append(lb.meansOf[j], idx)
			} else {
				lb.fixed[j][t] = true
			}
		}
		if len(lb.meansOf[j]) == 0 {
			continue
		}
		for t := 0; t < T; t++ {
			if lb.fixed[j][t] || (t > 0 && lb.fixed[j][t-1] && l.HasPaths()) {
				lb.occs = append(lb.occs, t)
			}
		}
	}
	slices.Sort(lb.occs)
	lb.occs = slices.Compact(lb.occs)
	return lb
}

// needed reports whether some categorical outcome has free means.
func (lb *LevelBlock) needed() bool {
	return slices.ContainsFunc(lb.meansOf, func(m []int) bool { return len(m) > 0 })
}

// Name implements Block.
func (*LevelBlock) Name() string { return "level moves" }

// innovationSums fills rsum[t] with the sum over persons seen at t of the
// innovation r_it (w_i0 at t = 0), for the occasions in occs.
func (lb *LevelBlock) innovationSums(st *State) {
	l := st.L
	J, JJ := l.J, l.J*l.J
	clear(lb.rsum)
	for i := 0; i < l.N; i++ {
		off, n := l.Panel.Offset[i], l.Panel.Len[i]
		b := st.B[i*J : i*J+J]
		for _, t := range lb.occs {
			if t >= n {
				break
			}
			for k := 0; k < J; k++ {
				lb.w[k] = st.Ystar[off+t*J+k] - st.Nu[t*J+k] - b[k]
			}
			if t > 0 && l.HasPaths() {
				for k := 0; k < J; k++ {
					lb.wp[k] = st.Ystar[off+(t-1)*J+k] - st.Nu[(t-1)*J+k] - b[k]
				}
				a := st.A[t*JJ : (t+1)*JJ]
				for r := 0; r < J; r++ {
					for c := 0; c < J; c++ {
						lb.w[r] -= a[r*J+c] * lb.wp[c]
					}
				}
			}
			rs := lb.rsum[t*J : t*J+J]
			for k := range rs {
				rs[k] += lb.w[k]
			}
		}
	}
}

// shift writes d_t of outcome j into lb.d and reports whether it is not zero.
func (lb *LevelBlock) shift(st *State, j, t int) bool {
	l := st.L
	J, JJ := l.J, l.J*l.J
	clear(lb.d)
	nz := false
	if lb.fixed[j][t] {
		lb.d[j] = 1
		nz = true
	}
	if t > 0 && lb.fixed[j][t-1] && l.HasPaths() {
		a := st.A[t*JJ : (t+1)*JJ]
		for r := 0; r < J; r++ {
			lb.d[r] -= a[r*J+j]
		}
		nz = true
	}
	return nz
}

// conditional returns the precision and linear coefficient of the log
// density in c of outcome j's translation, given rsum.
func (lb *LevelBlock) conditional(st *State, j int) (prec, lin float64) {
	l := st.L
	J, JJ := l.J, l.J*l.J
	for _, t := range lb.occs {
		if !lb.shift(st, j, t) {
			continue
		}
		p := st.SigInv[t*JJ : (t+1)*JJ]
		for r := 0; r < J; r++ {
			v := 0.0
			for c := 0; c < J; c++ {
				v += p[r*J+c] * lb.d[c]
			}
			lb.u[r] = v
		}
		s, g := 0.0, 0.0
		for r := 0; r < J; r++ {
			s += lb.d[r] * lb.u[r]
			g += lb.u[r] * lb.rsum[t*J+r]
		}
		prec += float64(l.CountAt[t]) * s
		lin -= g
	}
	// Priors: N(0, sd^2) on each threshold and each free mean.
	iv := 1 / (l.Priors.ThresholdSD * l.Priors.ThresholdSD)
	for _, v := range st.Tau[j] {
		prec += iv
		lin -= iv * v
	}
	iv = 1 / (l.Priors.MeanSD * l.Priors.MeanSD)
	for _, idx := range lb.meansOf[j] {
		prec += iv
		lin -= iv * st.Mean[idx]
	}
	return prec, lin
}

// Update implements Block.
func (lb *LevelBlock) Update(st *State, rng *rand.Rand) error {
	l := st.L
	J := l.J
	lb.innovationSums(st)
	for j := 0; j < J; j++ {
		if len(lb.meansOf[j]) == 0 {
			continue
		}
		prec, lin := lb.conditional(st, j)
		if !(prec > 0) || math.IsInf(lin, 0) || math.IsNaN(lin) {
			return errBlock("level moves", "the translation's conditional is not a proper normal")
		}
		c := lin/prec + rng.NormFloat64()/math.Sqrt(prec)
		for k := range st.Tau[j] {
			st.Tau[j][k] += c
		}
		for i := 0; i < l.N; i++ {
			off := l.Panel.Offset[i]
			for t := 0; t < l.Panel.Len[i]; t++ {
				st.Ystar[off+t*J+j] += c
			}
		}
		for _, idx := range lb.meansOf[j] {
			st.Mean[idx] += c
		}
		// Each person's innovation at t moved by c d_t: keep the sums
		// current for the next outcome.
		for _, t := range lb.occs {
			if lb.shift(st, j, t) {
				for r := 0; r < J; r++ {
					lb.rsum[t*J+r] += float64(l.CountAt[t]) * c * lb.d[r]
				}
			}
		}
	}
	st.SyncNu()
	return nil
}
