package sampler

import (
	"math/rand/v2"

	"github.com/lagstar/lagstar/internal/dense"
)

// MeanBlock draws the free occasion means from their joint normal full
// conditional. With e_it = y*_it - b_i and nu_t = X_t theta, the innovations
// are zeta_it = r_it - Z_t theta with Z_t = X_t - A_t X_{t-1} and
// r_it = e_it - A_t e_i,t-1, so theta has precision
// I/sd^2 + sum_t n_t Z_t' Sigma_t^{-1} Z_t and linear term
// sum_t Z_t' Sigma_t^{-1} sum_i r_it, where n_t counts the persons present
// at t. Parameters are ordered by occasion, so the precision is banded
// (plus dense rows for means equal over time) and is factored along its
// envelope (Chan & Jeliazkov 2009). Reads Ystar, B, A and the caches;
// writes Mean and Nu.
type MeanBlock struct {
	p          int
	prec, h    []float64
	first      []int
	sumE, sumF []float64 // T x J sums of e_t and e_{t-1} over persons present at t
	cols       []int
	colv       []float64
	r, tmp     []float64
	// ARMA(1,1) scratch (updateMA, movingavg.go).
	maE, maR, maZ, maZp, maSZ, maSum []float64
}

// NewMeanBlock allocates the block's workspace.
func NewMeanBlock(l *Layout) *MeanBlock {
	J, T, p := l.J, l.T, l.NMean
	mb := &MeanBlock{p: p, prec: make([]float64, p*p), h: make([]float64, p), first: make([]int, p),
		sumE: make([]float64, T*J), sumF: make([]float64, T*J), cols: make([]int, 0, 2*J),
		colv: make([]float64, 2*J*J), r: make([]float64, J), tmp: make([]float64, J)}
	if l.MA {
		mb.maE, mb.maR = make([]float64, l.MaxLen*J), make([]float64, l.MaxLen*J)
		mb.maZ, mb.maZp, mb.maSZ = make([]float64, J*p), make([]float64, J*p), make([]float64, J*p)
		mb.maSum = make([]float64, T*J)
	}
	return mb
}

// Name implements Block.
func (*MeanBlock) Name() string { return "occasion means" }

// Update implements Block.
func (mb *MeanBlock) Update(st *State, rng *rand.Rand) error {
	l := st.L
	if l.MA {
		return mb.updateMA(st, rng)
	}
	J, T, p := l.J, l.T, mb.p
	JJ := J * J
	for k := range mb.sumE {
		mb.sumE[k], mb.sumF[k] = 0, 0
	}
	for i := 0; i < l.N; i++ {
		off := l.Panel.Offset[i]
		b := st.B[i*J : i*J+J]
		for t := 0; t < l.Panel.Len[i]; t++ {
			for j := 0; j < J; j++ {
				e := st.Ystar[off+t*J+j] - b[j]
				mb.sumE[t*J+j] += e
				if t+1 < l.Panel.Len[i] {
					mb.sumF[(t+1)*J+j] += e
				}
			}
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
	for t := 0; t < T; t++ {
		// Columns of Z_t with their J-vectors.
		mb.cols = mb.cols[:0]
		colv := mb.colv
		for k := range colv {
			colv[k] = 0
		}
		for j := 0; j < J; j++ {
			if idx := l.MeanIdx[t*J+j]; idx >= 0 {
				q := mb.col(idx)
				colv[q*J+j]++
			}
		}
		var a []float64
		if t > 0 {
			a = st.A[t*JJ : (t+1)*JJ]
			for k := 0; k < J; k++ {
				idx := l.MeanIdx[(t-1)*J+k]
				if idx < 0 {
					continue
				}
				q := mb.col(idx)
				for j := 0; j < J; j++ {
					colv[q*J+j] -= a[j*J+k]
				}
			}
		}
		if len(mb.cols) == 0 {
			continue
		}
		// r_t summed over persons.
		for j := 0; j < J; j++ {
			v := mb.sumE[t*J+j]
			if t > 0 {
				for k := 0; k < J; k++ {
					v -= a[j*J+k] * mb.sumF[t*J+k]
				}
			}
			mb.r[j] = v
		}
		si := st.SigInv[t*JJ : (t+1)*JJ]
		n := float64(l.CountAt[t])
		for q1, c1 := range mb.cols {
			dense.MulVec(mb.tmp, si, colv[q1*J:q1*J+J], J, J) // Sigma^{-1} z_c1
			for q2, c2 := range mb.cols {
				if c2 > c1 {
					continue
				}
				v := 0.0
				for k := 0; k < J; k++ {
					v += colv[q2*J+k] * mb.tmp[k]
				}
				mb.prec[c1*p+c2] += n * v
			}
			v := 0.0
			for k := 0; k < J; k++ {
				v += mb.tmp[k] * mb.r[k]
			}
			mb.h[c1] += v
		}
	}
	for i := 0; i < p; i++ {
		f := i
		for k := 0; k < i; k++ {
			if mb.prec[i*p+k] != 0 {
				f = k
				break
			}
		}
		mb.first[i] = f
	}
	if !dense.EnvelopeCholesky(mb.prec, p, mb.first) {
		return errBlock("occasion means", "conditional precision is not positive definite")
	}
	h := mb.h
	dense.EnvelopeSolveLower(mb.prec, p, mb.first, h)
	for k := range h {
		h[k] += rng.NormFloat64()
	}
	dense.EnvelopeSolveUpperT(mb.prec, p, mb.first, h)
	copy(st.Mean, h)
	st.SyncNu()
	return nil
}

// col returns the slot of parameter idx among the current Z_t columns.
func (mb *MeanBlock) col(idx int) int {
	for q, c := range mb.cols {
		if c == idx {
			return q
		}
	}
	mb.cols = append(mb.cols, idx)
	return len(mb.cols) - 1
}
