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
// approximation at its mode. Reads and writes Ystar, B, Tau, Mean, Nu.
type ScaleBlock struct {
	w       []float64
	psiIn   []float64
	tmp     []float64
	meansOf [][]int
	d       []float64 // scaled coordinates per outcome
}

// NewScaleBlock allocates the block's workspace.
func NewScaleBlock(l *Layout) *ScaleBlock {
	sb := &ScaleBlock{w: make([]float64, l.MaxLen*l.J), psiIn: make([]float64, l.J*l.J), tmp: make([]float64, l.J*l.J+l.J),
		meansOf: NewLocationBlock(l).meansOf, d: make([]float64, l.J)}
	J := l.J
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
		sb.d[j] = d
	}
	return sb
}

// Name implements Block.
func (*ScaleBlock) Name() string { return "scale moves" }

// Update implements Block.
func (sb *ScaleBlock) Update(st *State, rng *rand.Rand) error {
	l := st.L
	J := l.J
	JJ := J * J
	if l.RI && !dense.Inverse(sb.psiIn, st.Psi, J, sb.tmp[:JJ], sb.tmp[JJ:]) {
		return errBlock("scale moves", "random-intercept covariance is not positive definite")
	}
	for j := 0; j < J; j++ {
		if !l.Cat[j] {
			continue
		}
		// log pi(g) = -a g^2/2 + c g + const.
		a, c := 0.0, 0.0
		for i := 0; i < l.N; i++ {
			st.fillW(sb.w, i, st.Ystar)
			w := sb.w
			for t := 0; t < l.Panel.Len[i]; t++ {
				si := st.SigInv[t*JJ : (t+1)*JJ]
				// zeta_t = u + g v, v = e_j w_tj - A_t[:, j] w_{t-1,j}.
				var at []float64
				if t > 0 {
					at = st.A[t*JJ : (t+1)*JJ]
				}
				for r := 0; r < J; r++ {
					vr, ur := sb.split(w, at, t, r, j, J)
					for q := 0; q < J; q++ {
						vq, _ := sb.split(w, at, t, q, j, J)
						a += vr * si[r*J+q] * vq
						c -= ur * si[r*J+q] * vq
					}
				}
			}
			if l.RI {
				b := st.B[i*J : i*J+J]
				a += b[j] * sb.psiIn[j*J+j] * b[j]
				for k := 0; k < J; k++ {
					if k != j {
						c -= b[k] * sb.psiIn[k*J+j] * b[j]
					}
				}
			}
		}
		iv := 1 / (l.Priors.ThresholdSD * l.Priors.ThresholdSD)
		for _, v := range st.Tau[j] {
			a += iv * v * v
		}
		iv = 1 / (l.Priors.MeanSD * l.Priors.MeanSD)
		for _, idx := range sb.meansOf[j] {
			a += iv * st.Mean[idx] * st.Mean[idx]
		}
		d := sb.d[j]
		h := func(eta float64) float64 {
			g := math.Exp(eta)
			return d*eta - 0.5*a*g*g + c*g
		}
		g0 := (c + math.Sqrt(c*c+4*a*d)) / (2 * a)
		if !(g0 > 0) || math.IsInf(g0, 0) {
			continue
		}
		m := math.Log(g0)
		curv := 2*a*g0*g0 - c*g0 // -h''(m)
		if !(curv > 0) {
			continue
		}
		sd := 1 / math.Sqrt(curv)
		prop := m + sd*rng.NormFloat64()
		// Independence proposal N(m, sd^2) from the current eta = 0.
		logr := h(prop) - h(0) - (-0.5 * (prop - m) * (prop - m) / (sd * sd)) + (-0.5 * m * m / (sd * sd))
		if math.Log(rng.Float64()) >= logr {
			continue
		}
		g := math.Exp(prop)
		for i := 0; i < l.N; i++ {
			off := l.Panel.Offset[i]
			for t := 0; t < l.Panel.Len[i]; t++ {
				st.Ystar[off+t*J+j] *= g
			}
			if l.RI {
				st.B[i*J+j] *= g
			}
		}
		for k := range st.Tau[j] {
			st.Tau[j][k] *= g
		}
		for _, idx := range sb.meansOf[j] {
			st.Mean[idx] *= g
		}
	}
	st.SyncNu()
	return nil
}

// split returns the parts of zeta_t[r] that scale with outcome j (v) and
// that do not (u).
func (sb *ScaleBlock) split(w, at []float64, t, r, j, J int) (v, u float64) {
	z := w[t*J+r]
	if r == j {
		v = z
	} else {
		u = z
	}
	if t > 0 {
		for k := 0; k < J; k++ {
			x := at[r*J+k] * w[(t-1)*J+k]
			if k == j {
				v -= x
			} else {
				u -= x
			}
		}
	}
	return v, u
}
