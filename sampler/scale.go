package sampler

import (
	"math"
	"math/rand/v2"

	"github.com/lagstar/lagstar/internal/dense"
)

// ScaleBlock moves the scale of each categorical outcome's latent
// responses, a move that data augmentation alone makes very slowly (Liu &
// Wu 1999, JASA 94:1264, parameter-expanded data augmentation). For outcome
// j it multiplies by g > 0, together, every latent response y*_ij., every
// random intercept b_ij, the thresholds of j and the free means of j, so
// category intervals are preserved and w_j is scaled by g. By Liu & Sabatti
// (2000, JASA 95:509, Theorem 1) drawing g with density proportional to
// pi(g x) g^d (d scaled coordinates) against the Haar measure dg/g leaves
// the posterior invariant. In eta = log g that density is
// exp(d eta - a e^{2 eta}/2 + c e^{eta}), a and c collecting the quadratic
// forms of the within paths, the random intercepts and the normal priors;
// it is drawn by an independence Metropolis-Hastings step from the normal
// approximation at its mode. Under a lagged latent response with own lags
// only (term_dynamic.go) the intercepts of outcome j's dynamic equation
// scale with it, and with A and Lambda diagonal its innovations still
// scale by g; with cross-lags they would not, and the move is not used.
// Reads and writes Ystar, B, Tau, Mean, Nu.
type ScaleBlock struct {
	m, r    []float64 // J x J sums of the quadratic forms
	v, sv   []float64 // J x J shares of the innovation and Sigma^{-1} times them
	w       []float64
	psiIn   []float64
	tmp     []float64
	meansOf [][]int
	d       []float64 // scaled coordinates per outcome
	ma      []float64 // ARMA(1,1) scratch (accumulateWQuadMA)
	dynOf   [][]int   // lagged latent response: each outcome's free intercepts
}

// NewScaleBlock allocates the block's workspace.
func NewScaleBlock(l *Layout) *ScaleBlock {
	sb := &ScaleBlock{m: make([]float64, l.J*l.J), r: make([]float64, l.J*l.J), v: make([]float64, l.J*l.J), sv: make([]float64, l.J*l.J),
		w: make([]float64, l.MaxLen*l.J), psiIn: make([]float64, l.NF()*l.NF()), tmp: make([]float64, l.NF()*l.NF()+l.NF()),
		meansOf: NewLocationBlock(l).meansOf, d: make([]float64, l.J)}
	if l.MA {
		sb.ma = make([]float64, (l.J+1)*l.MaxLen*l.J+l.J)
	}
	J := l.J
	if l.Dyn {
		sb.dynOf = make([][]int, J)
		eachDyn(l, func(idx, _, j int) { sb.dynOf[j] = append(sb.dynOf[j], idx) })
	}
	for j := 0; j < J; j++ {
		if !l.Cat[j] {
			continue
		}
		n := 0
		for _, tl := range l.Panel.Len {
			n += tl
		}
		d := float64(n + l.K[j] - 1 + len(sb.meansOf[j]))
		if l.RI {
			d += float64(l.N)
		}
		if l.Growth {
			d += float64(l.N) + 1 // the slopes and the mean slope
		}
		if l.Dyn {
			d += float64(len(sb.dynOf[j]))
		}
		sb.d[j] = d
	}
	return sb
}

// Name implements Block.
func (*ScaleBlock) Name() string { return "scale moves" }

// Update implements Block.
//
// One pass over the data collects M[j][k] = sum_t v_j' Sigma_t^{-1} v_k,
// where v_j = e_j w_tj - A_t[:, j] w_{t-1,j} is outcome j's share of the
// innovation (zeta_t = sum_j v_j), and R[j][k] = sum_i b_ij (Psi^{-1})_jk b_ik.
// Scaling outcome j by g multiplies row and column j of both by g (the
// diagonal by g^2), so the outcomes are moved one after another from these
// sums alone.
func (sb *ScaleBlock) Update(st *State, rng *rand.Rand) error {
	l := st.L
	J := l.J
	nf := l.NF()
	if l.RI && !dense.Inverse(sb.psiIn, st.Psi, nf, sb.tmp[:nf*nf], sb.tmp[nf*nf:]) {
		return errBlock("scale moves", "random-intercept covariance is not positive definite")
	}
	statsOK := st.WQuadOK
	M, R := sb.m, sb.r
	for k := range M {
		M[k], R[k] = 0, 0
	}
	if st.WQuadOK {
		copy(M, st.WQuad)
	} else {
		for i := 0; i < l.N; i++ {
			st.fillW(sb.w, i, st.Ystar)
			if l.MA {
				accumulateWQuadMA(st, M, sb.w, l.Panel.Len[i], sb.ma)
				continue
			}
			accumulateWQuad(st, M, sb.w, l.Panel.Len[i], sb.v, sb.sv)
		}
	}
	symmetrize(M, J)
	if l.Growth {
		sb.growthQuad(st, R)
	} else if l.RI {
		for i := 0; i < l.N; i++ {
			b := st.B[i*J : i*J+J]
			for j := 0; j < J; j++ {
				for k := 0; k <= j; k++ {
					R[j*J+k] += b[j] * sb.psiIn[j*J+k] * b[k]
				}
			}
		}
		symmetrize(R, J)
	}
	for j := 0; j < J; j++ {
		if !l.Cat[j] {
			continue
		}
		// log pi(g) = -a g^2/2 + c g + const.
		a := M[j*J+j] + R[j*J+j]
		c := 0.0
		for k := 0; k < J; k++ {
			if k != j {
				c -= M[j*J+k] + R[j*J+k]
			}
		}
		iv := 1 / (l.Priors.ThresholdSD * l.Priors.ThresholdSD)
		for _, x := range st.Tau[j] {
			a += iv * x * x
		}
		iv = 1 / (l.Priors.MeanSD * l.Priors.MeanSD)
		for _, idx := range sb.meansOf[j] {
			a += iv * st.Mean[idx] * st.Mean[idx]
		}
		var dc []float64
		if l.Dyn {
			dc, _, _ = st.dynParts()
			for _, idx := range sb.dynOf[j] {
				a += iv * dc[idx] * dc[idx]
			}
		}
		if l.Growth {
			sd := growthMeanSD(l, l.Priors, J+j)
			a += st.GMean[J+j] * st.GMean[J+j] / (sd * sd)
		}
		g, ok := sb.drawScale(rng, a, c, sb.d[j])
		if !ok {
			continue
		}
		for k := 0; k < J; k++ {
			f := g
			if k == j {
				f = g * g
			}
			M[j*J+k] *= f
			R[j*J+k] *= f
			if k != j {
				M[k*J+j] *= g
				R[k*J+j] *= g
			}
		}
		for i := 0; i < l.N; i++ {
			off := l.Panel.Offset[i]
			for t := 0; t < l.Panel.Len[i]; t++ {
				st.Ystar[off+t*J+j] *= g
			}
			if l.RI {
				st.B[i*J+j] *= g
			}
			if l.Growth {
				st.G[i*J+j] *= g
			}
		}
		if l.Growth {
			st.GMean[J+j] *= g // the mean intercept of a categorical outcome is 0
		}
		for k := range st.Tau[j] {
			st.Tau[j][k] *= g
		}
		for _, idx := range sb.meansOf[j] {
			st.Mean[idx] *= g
		}
		if l.Dyn {
			for _, idx := range sb.dynOf[j] {
				dc[idx] *= g
			}
		}
	}
	st.SyncNu()
	if statsOK {
		copy(st.WQuad, M) // the sums of the scaled state
		st.WQuadOK = true
	}
	return nil
}

// growthQuad writes into R (J x J, symmetric) the shares of the growth
// factors' prior quadratic form: R[j][k] = sum_i sum_{p,q} d_ipj
// (Psi^{-1})_{pj,qk} d_iqk over intercepts and slopes (p, q), d_i = f_i - mu.
// Scaling outcome j by g scales d_i.j by g, so R scales as in Update.
func (sb *ScaleBlock) growthQuad(st *State, R []float64) {
	l := st.L
	J, n := l.J, 2*l.J
	d := sb.tmp[:n]
	for i := 0; i < l.N; i++ {
		for j := 0; j < J; j++ {
			d[j] = st.B[i*J+j] - st.GMean[j]
			d[J+j] = st.G[i*J+j] - st.GMean[J+j]
		}
		for r := 0; r < n; r++ {
			for c := 0; c < n; c++ {
				if r%J >= c%J {
					R[(r%J)*J+c%J] += d[r] * sb.psiIn[r*n+c] * d[c]
				}
			}
		}
	}
	symmetrize(R, J)
}

// drawScale makes the independence Metropolis-Hastings step for eta =
// log g with target exp(d eta - a e^{2 eta}/2 + c e^eta), from eta = 0,
// proposing from the normal approximation at the mode. It returns the new
// g and whether the move was accepted.
func (sb *ScaleBlock) drawScale(rng *rand.Rand, a, c, d float64) (float64, bool) {
	h := func(eta float64) float64 {
		g := math.Exp(eta)
		return d*eta - 0.5*a*g*g + c*g
	}
	g0 := (c + math.Sqrt(c*c+4*a*d)) / (2 * a)
	if !(g0 > 0) || math.IsInf(g0, 0) {
		return 1, false
	}
	m := math.Log(g0)
	curv := 2*a*g0*g0 - c*g0 // -h''(m)
	if !(curv > 0) {
		return 1, false
	}
	sd := 1 / math.Sqrt(curv)
	prop := m + sd*rng.NormFloat64()
	// Independence proposal N(m, sd^2) from the current eta = 0.
	logr := h(prop) - h(0) + 0.5*(prop-m)*(prop-m)/(sd*sd) - 0.5*m*m/(sd*sd)
	if math.Log(rng.Float64()) >= logr {
		return 1, false
	}
	return math.Exp(prop), true
}
