package sampler

import (
	"bytes"
	"encoding/csv"
	"fmt"
	"math/rand/v2"
	"strconv"

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
	// MA holds moving-average coefficients (one per outcome, equal over
	// time; nil: none); it needs Sigma1.
	MA []float64
	// Growth: GrowthPsi (2J x 2J, intercepts first; nil: no growth)
	// replaces Psi, with the means GrowthMean (2J) and the time scores
	// Time (one per occasion; nil: 0, 1, 2, ...).
	GrowthPsi, GrowthMean, Time []float64
	// Lag regresses the latent response on its previous value
	// (term_dynamic.go): y*_i1 = c_1 + Loadings b_i + zeta_i1, y*_it = c_t +
	// b_i + A y*_i,t-1 + zeta_it, with the intercepts LagIntercepts (T x J,
	// nil: 0) and the first occasion's loadings Loadings (J x J, nil: the
	// identity); Nu is not used. It needs Sigma1.
	Lag                     bool
	LagIntercepts, Loadings []float64
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
	if sig1 == nil && tr.MA != nil {
		return nil, fmt.Errorf("simulate: moving averages need a first-occasion covariance")
	}
	if sig1 == nil {
		sig1 = make([]float64, JJ)
		if !stationaryCov(sig1, a, tr.Sigma, J, make([]float64, 6*JJ)) {
			return nil, fmt.Errorf("simulate: carry-over is not stable")
		}
	}
	sig := make([]float64, t*JJ)
	at := make([]float64, t*JJ)
	copy(sig, sig1)
	for s := 1; s < t; s++ {
		copy(sig[s*JJ:(s+1)*JJ], tr.Sigma)
		copy(at[s*JJ:(s+1)*JJ], a)
	}
	cat := make([]bool, J)
	for j, ty := range tr.Types {
		cat[j] = ty.Categorical()
	}
	g, err := NewGenerator(J, t, cat, tr.Nu, tr.Tau, at, sig, tr.Psi)
	if err != nil {
		return nil, fmt.Errorf("simulate: %v", err)
	}
	if tr.GrowthPsi != nil {
		time := tr.Time
		if time == nil {
			time = make([]float64, t)
			for s := range time {
				time[s] = float64(s)
			}
		}
		if len(time) < t {
			return nil, fmt.Errorf("simulate: %d time scores for %d occasions", len(time), t)
		}
		mean := tr.GrowthMean
		if mean == nil {
			mean = make([]float64, 2*J)
		}
		if err := g.SetGrowth(time, mean, tr.GrowthPsi); err != nil {
			return nil, fmt.Errorf("simulate: %v", err)
		}
	}
	if tr.Lag {
		if tr.Sigma1 == nil {
			return nil, fmt.Errorf("simulate: a lagged latent response needs a first-occasion covariance")
		}
		lam := tr.Loadings
		if lam == nil {
			lam = make([]float64, JJ)
			for j := 0; j < J; j++ {
				lam[j*J+j] = 1
			}
		}
		c := func(s, j int) float64 {
			if tr.LagIntercepts == nil {
				return 0
			}
			return tr.LagIntercepts[s*J+j]
		}
		g.Nu, g.Load = make([]float64, t*J), make([]float64, t*JJ)
		dynRecursion(g.Nu, g.Load, c, at, lam, J, t)
	}
	if tr.MA != nil {
		g.M = make([]float64, t*J)
		for s := 2; s < t; s++ {
			copy(g.M[s*J:(s+1)*J], tr.MA)
		}
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
	var rec []string
	for i := 0; i < n; i++ {
		g.Person(t, rng, b, func(s, j int, y float64) {
			if j == 0 {
				rec = []string{strconv.Itoa(i + 1), strconv.Itoa(s + 1)}
			}
			switch {
			case rng.Float64() < tr.Missing:
				rec = append(rec, missingText)
			case !cat[j]:
				rec = append(rec, strconv.FormatFloat(y, 'g', 8, 64))
			case tr.Codes != nil && tr.Codes[j] != nil:
				rec = append(rec, tr.Codes[j][g.Category(j, y)])
			default:
				rec = append(rec, strconv.Itoa(g.Category(j, y)))
			}
			if j == J-1 {
				wr.Write(rec)
			}
		})
	}
	wr.Flush()
	return buf.Bytes(), wr.Error()
}
