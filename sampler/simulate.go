package sampler

import (
	"bytes"
	"encoding/csv"
	"fmt"
	"math/rand/v2"
	"strconv"

	"github.com/lagstar/lagstar/internal/dense"
	"github.com/lagstar/lagstar/model"
)

// Truth holds the values from which Simulate generates a panel: outcome j
// has latent response y*_ijt = Nu[t*J+j] + b_ij + w_ijt with
// b_i ~ N(0, Psi), w_i1 ~ N(0, Sigma1) (stationary when Sigma1 is nil),
// w_it = A w_i,t-1 + zeta_it, zeta_it ~ N(0, Sigma), and categories cut at Tau.
type Truth struct {
	Names  []string
	Types  []model.OutcomeType
	Tau    [][]float64 // thresholds per categorical outcome
	Nu     []float64   // T x J occasion means; nil means zero
	Psi    []float64   // J x J; nil: no random intercepts
	A      []float64   // J x J carry-over (equal over time); nil: none
	Sigma  []float64   // J x J innovation covariance
	Sigma1 []float64   // J x J first-occasion covariance; nil: stationary
	// Missing is the probability that a cell is missing; such cells are
	// written as MissingCode ("NA" when empty and MissingSet is false).
	Missing     float64
	MissingCode string
	MissingSet  bool
	// PersonCol and OccasionCol name the index columns ("person" and
	// "occasion" when empty); Codes[j], when not nil, names outcome j's
	// categories (else they are written 0..K-1).
	PersonCol, OccasionCol string
	Codes                  [][]string
}

// Simulate draws a long-format CSV panel (columns person, occasion, then one
// per outcome) of n persons and t occasions, with every row present
// (missing cells written as NA).
func Simulate(tr Truth, n, t int, rng *rand.Rand) ([]byte, error) {
	missingText := tr.MissingCode
	if !tr.MissingSet {
		missingText = "NA"
	}
	J := len(tr.Names)
	JJ := J * J
	sig1 := tr.Sigma1
	a := tr.A
	if a == nil {
		a = make([]float64, JJ)
	}
	if sig1 == nil {
		sig1 = make([]float64, JJ)
		if !stationaryCov(sig1, a, tr.Sigma, J, make([]float64, 6*JJ)) {
			return nil, fmt.Errorf("simulate: carry-over is not stable")
		}
	}
	cholOf := func(m []float64) ([]float64, error) {
		c := append([]float64(nil), m...)
		if !dense.Cholesky(c, J) {
			return nil, fmt.Errorf("simulate: covariance not positive definite")
		}
		return c, nil
	}
	c1, err := cholOf(sig1)
	if err != nil {
		return nil, err
	}
	cs, err := cholOf(tr.Sigma)
	if err != nil {
		return nil, err
	}
	var cp []float64
	if tr.Psi != nil {
		if cp, err = cholOf(tr.Psi); err != nil {
			return nil, err
		}
	}
	draw := func(dst, chol []float64) {
		z := make([]float64, J)
		for k := range z {
			z[k] = rng.NormFloat64()
		}
		dense.MulVec(dst, chol, z, J, J)
	}
	var buf bytes.Buffer
	wr := csv.NewWriter(&buf)
	pc, oc := tr.PersonCol, tr.OccasionCol
	if pc == "" {
		pc = "person"
	}
	if oc == "" {
		oc = "occasion"
	}
	wr.Write(append([]string{pc, oc}, tr.Names...))
	b := make([]float64, J)
	w := make([]float64, J)
	prev := make([]float64, J)
	zeta := make([]float64, J)
	for i := 0; i < n; i++ {
		for k := range b {
			b[k] = 0
		}
		if cp != nil {
			draw(b, cp)
		}
		for s := 0; s < t; s++ {
			if s == 0 {
				draw(w, c1)
			} else {
				draw(zeta, cs)
				dense.MulVec(w, a, prev, J, J)
				for k := range w {
					w[k] += zeta[k]
				}
			}
			copy(prev, w)
			rec := []string{strconv.Itoa(i + 1), strconv.Itoa(s + 1)}
			for j := 0; j < J; j++ {
				nu := 0.0
				if tr.Nu != nil {
					nu = tr.Nu[s*J+j]
				}
				y := nu + b[j] + w[j]
				if rng.Float64() < tr.Missing {
					rec = append(rec, missingText)
					continue
				}
				if !tr.Types[j].Categorical() {
					rec = append(rec, strconv.FormatFloat(y, 'g', 8, 64))
					continue
				}
				k := 0
				for k < len(tr.Tau[j]) && y > tr.Tau[j][k] {
					k++
				}
				if tr.Codes != nil && tr.Codes[j] != nil {
					rec = append(rec, tr.Codes[j][k])
				} else {
					rec = append(rec, strconv.Itoa(k))
				}
			}
			wr.Write(rec)
		}
	}
	wr.Flush()
	return buf.Bytes(), wr.Error()
}
