package sampler

import (
	"math"
	"math/rand/v2"

	"github.com/lagstar/lagstar/internal/dense"
)

// LocationBlock removes the slow drift between an outcome's location
// parameters and the mean of its random intercepts. For each outcome j it
// draws a translation c exactly from its conditional along the group of
// moves (Liu & Sabatti 2000, JASA 95:509; Liu & Wu 1999 parameter
// expansion): for a categorical outcome, thresholds, latent responses and
// every b_ij all move by +c; for a continuous outcome, every free mean of j
// moves by +c and every b_ij by -c. The within-person part w is unchanged,
// so c's density comes from the priors alone: the thresholds' (or means')
// normal prior and the random intercepts' N(0, Psi). It is Gaussian in c.
// Used only with random intercepts. Reads and writes Tau, Ystar, Mean, Nu, B.
type LocationBlock struct {
	psiIn, tmp []float64
	meansOf    [][]int // free mean parameters of each outcome
}

// NewLocationBlock allocates the block's workspace.
func NewLocationBlock(l *Layout) *LocationBlock {
	lb := &LocationBlock{psiIn: make([]float64, l.J*l.J), tmp: make([]float64, l.J*l.J+l.J), meansOf: make([][]int, l.J)}
	seen := make([]bool, l.NMean)
	for t := 0; t < l.T; t++ {
		for j := 0; j < l.J; j++ {
			if idx := l.MeanIdx[t*l.J+j]; idx >= 0 && !seen[idx] {
				seen[idx] = true
				lb.meansOf[j] = append(lb.meansOf[j], idx)
			}
		}
	}
	return lb
}

// Name implements Block.
func (*LocationBlock) Name() string { return "location moves" }

// Update implements Block.
func (lb *LocationBlock) Update(st *State, rng *rand.Rand) error {
	l := st.L
	J := l.J
	if !dense.Inverse(lb.psiIn, st.Psi, J, lb.tmp[:J*J], lb.tmp[J*J:]) {
		return errBlock("location moves", "random-intercept covariance is not positive definite")
	}
	for j := 0; j < J; j++ {
		sign := 1.0
		var locs []float64
		iv := 0.0
		if l.Cat[j] {
			locs = st.Tau[j]
			iv = 1 / (l.Priors.ThresholdSD * l.Priors.ThresholdSD)
		} else {
			if len(lb.meansOf[j]) == 0 {
				continue
			}
			sign = -1
			iv = 1 / (l.Priors.MeanSD * l.Priors.MeanSD)
		}
		// log density in c: -1/2 iv sum_k (loc_k + c)^2
		//                   -1/2 sum_i (b_i + sign c e_j)' Psi^{-1} (b_i + sign c e_j)
		prec := float64(l.N) * lb.psiIn[j*J+j]
		lin := 0.0
		for i := 0; i < l.N; i++ {
			b := st.B[i*J : i*J+J]
			for k := 0; k < J; k++ {
				lin -= sign * lb.psiIn[j*J+k] * b[k]
			}
		}
		if l.Cat[j] {
			for _, v := range locs {
				prec += iv
				lin -= iv * v
			}
		} else {
			for _, idx := range lb.meansOf[j] {
				prec += iv
				lin -= iv * st.Mean[idx]
			}
		}
		c := lin/prec + rng.NormFloat64()/math.Sqrt(prec)
		for i := 0; i < l.N; i++ {
			st.B[i*J+j] += sign * c
		}
		if l.Cat[j] {
			for k := range locs {
				locs[k] += c
			}
			for i := 0; i < l.N; i++ {
				off := l.Panel.Offset[i]
				for t := 0; t < l.Panel.Len[i]; t++ {
					st.Ystar[off+t*J+j] += c
				}
			}
		} else {
			for _, idx := range lb.meansOf[j] {
				st.Mean[idx] += c
			}
		}
	}
	st.SyncNu()
	return nil
}
