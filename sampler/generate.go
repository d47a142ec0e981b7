package sampler

import (
	"fmt"
	"math/rand/v2"

	"github.com/lagstar/lagstar/internal/dense"
)

// Generator is the model as a data-generating process, the one used for
// posterior predictive replicates (State.Replicate), for lagstar simulate
// (Simulate) and for the calibration's panels (validate): for person i,
//
//	b_i ~ N(0, Psi),  w_i1 ~ N(0, Sigma_1),  w_it = A_t w_i,t-1 + zeta_it, zeta_it ~ N(0, Sigma_t),
//	y*_ijt = nu_tj + b_ij + w_itj,  y_ijt = k where tau_j,k-1 < y*_ijt <= tau_jk.
//
// Normal vectors are drawn as a Cholesky factor times standard normals,
// intercepts first, then occasion by occasion.
type Generator struct {
	J, T int
	Cat  []bool
	Nu   []float64   // T x J occasion means (nil: 0)
	Tau  [][]float64 // thresholds per categorical outcome
	A    []float64   // T blocks of J x J, block 0 unused (nil: no carry-over)
	// M holds moving-average coefficients (T x J, nil: none): w_t gains
	// M_t zeta_{t-1} (movingavg.go; zero at the first two occasions).
	M []float64
	// Growth (term_growth.go, SetGrowth): Time holds the time scores
	// (nil: no growth), GrowthMean the 2J means of the intercepts and
	// slopes, psiChol the Cholesky factor of their covariance; y*_ijt
	// gains s_t g_ij.
	Time, GrowthMean []float64
	// Load holds the between loadings S_t of a lagged latent response
	// (term_dynamic.go; T blocks of J x J, nil: the identity): y*_ijt =
	// nu_tj + (S_t b_i)_j + w_itj.
	Load []float64

	sigChol, psiChol []float64
	f                []float64 // growth factors of the current person
	z, cur, prev     []float64
	zeta, zetaPrev   []float64
}

// NewGenerator factors the covariances: sig holds Sigma_t for t =
// 0..T-1 (T blocks of J x J), psi the random-intercept covariance (nil:
// no random intercepts).
func NewGenerator(J, T int, cat []bool, nu []float64, tau [][]float64, a, sig, psi []float64) (*Generator, error) {
	JJ := J * J
	g := &Generator{J: J, T: T, Cat: cat, Nu: nu, Tau: tau, A: a, sigChol: make([]float64, T*JJ),
		z: make([]float64, J), cur: make([]float64, J), prev: make([]float64, J), zeta: make([]float64, J), zetaPrev: make([]float64, J)}
	copy(g.sigChol, sig[:T*JJ])
	for t := 0; t < T; t++ {
		if !dense.Cholesky(g.sigChol[t*JJ:(t+1)*JJ], J) {
			return nil, fmt.Errorf("covariance at occasion %d not positive definite", t+1)
		}
	}
	if psi != nil {
		g.psiChol = append([]float64(nil), psi...)
		if !dense.Cholesky(g.psiChol, J) {
			return nil, fmt.Errorf("random-intercept covariance not positive definite")
		}
	}
	return g, nil
}

// SetGrowth makes the generator's persons grow along time scores time:
// intercepts and slopes f_i ~ N(mean, psi), psi 2J x 2J (intercepts
// first), replacing the random intercepts.
func (g *Generator) SetGrowth(time, mean, psi []float64) error {
	n := 2 * g.J
	g.psiChol = append([]float64(nil), psi[:n*n]...)
	if !dense.Cholesky(g.psiChol, n) {
		return fmt.Errorf("covariance of the intercepts and slopes not positive definite")
	}
	g.Time, g.GrowthMean = time, mean
	g.f, g.z = make([]float64, n), make([]float64, n)
	return nil
}

// Generator returns the state's model as a generator (on the analysis
// scale: continuous outcomes standardized).
func (s *State) Generator() (*Generator, error) {
	var psi []float64
	if s.L.RI && !s.L.Growth {
		psi = s.Psi
	}
	g, err := NewGenerator(s.L.J, s.L.T, s.L.Cat, s.Nu, s.Tau, s.A, s.Sig, psi)
	if err == nil && s.L.MA {
		g.M = s.M
	}
	if err == nil && s.L.Growth {
		err = g.SetGrowth(s.L.Time, s.GMean, s.Psi)
	}
	if err == nil && s.L.Dyn {
		g.Load = s.Load
	}
	return g, err
}

func (g *Generator) draw(dst, chol []float64, rng *rand.Rand) {
	n := len(dst)
	z := g.z[:n]
	for q := range z {
		z[q] = rng.NormFloat64()
	}
	dense.MulVec(dst, chol, z, n, n)
}

// Person draws one person's random intercepts into b (J values; under
// growth the intercepts, the slopes being drawn with them) and
// latent responses at occasions 0..n-1, calling cell(t, j, y*) for every
// cell in order, after occasion t's within part is drawn (cell may draw
// from rng too, e.g. whether the cell is missing).
func (g *Generator) Person(n int, rng *rand.Rand, b []float64, cell func(t, j int, ystar float64)) {
	J := g.J
	JJ := J * J
	for q := range b {
		b[q] = 0
	}
	var slope []float64
	switch {
	case g.Time != nil:
		g.draw(g.f, g.psiChol, rng)
		for q := range g.f {
			g.f[q] += g.GrowthMean[q]
		}
		copy(b, g.f[:J])
		slope = g.f[J:]
	case g.psiChol != nil:
		g.draw(b, g.psiChol, rng)
	}
	cur, prev := g.cur, g.prev
	for t := 0; t < n; t++ {
		g.draw(cur, g.sigChol[t*JJ:(t+1)*JJ], rng)
		if g.M != nil {
			copy(g.zeta, cur)
			if t > 0 {
				for r := 0; r < J; r++ {
					cur[r] += g.M[t*J+r] * g.zetaPrev[r]
				}
			}
			copy(g.zetaPrev, g.zeta)
		}
		if t > 0 && g.A != nil {
			a := g.A[t*JJ : (t+1)*JJ]
			for r := 0; r < J; r++ {
				for c := 0; c < J; c++ {
					cur[r] += a[r*J+c] * prev[c]
				}
			}
		}
		copy(prev, cur)
		for j := 0; j < J; j++ {
			nu := 0.0
			if g.Nu != nil {
				nu = g.Nu[t*J+j]
			}
			y := nu + b[j] + cur[j]
			if g.Load != nil {
				y = nu + cur[j]
				for k, bk := range b {
					y += g.Load[(t*J+j)*J+k] * bk
				}
			}
			if slope != nil {
				y += g.Time[t] * slope[j]
			}
			cell(t, j, y)
		}
	}
}

// Category returns the category of latent response y of categorical
// outcome j.
func (g *Generator) Category(j int, y float64) int {
	k := 0
	for k < len(g.Tau[j]) && y > g.Tau[j][k] {
		k++
	}
	return k
}
