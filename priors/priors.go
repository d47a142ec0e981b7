package priors

import (
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/lagstar/lagstar/internal/dense"
)

// Set is the full prior of a model. The zero value is not useful; start
// from Default.
type Set struct {
	// ThresholdSD is the sd of the independent normal priors N(0, sd^2) on
	// thresholds, restricted to increasing order.
	ThresholdSD float64
	// MeanSD is the sd of the N(0, sd^2) prior on each free occasion mean.
	MeanSD float64
	// PathSD is the sd of the N(0, sd^2) prior on each carry-over and cross-lag.
	PathSD float64
	// RIDfExtra and RIScale give the inverse-Wishart(J + RIDfExtra, RIScale*I)
	// prior on the random-intercept covariance.
	RIDfExtra, RIScale float64
	// VarShape and VarScale give the inverse-gamma(shape, scale) prior on
	// each free innovation or initial variance (continuous outcomes); density
	// proportional to v^(-shape-1) exp(-scale/v).
	VarShape, VarScale float64
}

// Default returns the default priors of MODEL.md: weakly informative on the
// latent scale. Correlation matrices get the uniform prior on the set of
// positive-definite correlation matrices.
func Default() Set {
	return Set{ThresholdSD: 5, MeanSD: 5, PathSD: 1, RIDfExtra: 1, RIScale: 1, VarShape: 1, VarScale: 1}
}

// Describe lists the priors in words, for reports.
func (s Set) Describe(J int) []string {
	return []string{
		fmt.Sprintf("thresholds: independent normal(0, %g^2), kept in increasing order", s.ThresholdSD),
		fmt.Sprintf("occasion means: normal(0, %g^2)", s.MeanSD),
		fmt.Sprintf("carry-over and cross-lag paths: normal(0, %g^2)", s.PathSD),
		fmt.Sprintf("random-intercept covariance: inverse-Wishart(df %g, scale %g x identity)", float64(J)+s.RIDfExtra, s.RIScale),
		"correlations of innovations and of the first occasion: uniform over positive-definite correlation matrices",
		fmt.Sprintf("free variances (continuous outcomes): inverse-gamma(shape %g, scale %g)", s.VarShape, s.VarScale),
	}
}

// LogNormal returns the log density of N(0, sd^2) at x, up to a constant.
func LogNormal(x, sd float64) float64 { return -0.5 * x * x / (sd * sd) }

// LogInvGammaOfLogSD returns, up to a constant, the log density of
// eta = log(sd) when the variance sd^2 has the inverse-gamma(shape, scale)
// prior (the Jacobian of v = exp(2 eta) is included).
func LogInvGammaOfLogSD(eta, shape, scale float64) float64 {
	v := math.Exp(2 * eta)
	return -2*shape*eta - scale/v
}

// Gamma returns a draw from the gamma distribution with the given shape and
// unit scale, by Marsaglia & Tsang (2000, ACM TOMS 26:363); shapes below 1
// use the boost x * U^(1/shape).
func Gamma(rng *rand.Rand, shape float64) float64 {
	if shape < 1 {
		u := rng.Float64()
		return Gamma(rng, shape+1) * math.Pow(u, 1/shape)
	}
	d := shape - 1.0/3
	c := 1 / math.Sqrt(9*d)
	for {
		x := rng.NormFloat64()
		v := 1 + c*x
		if v <= 0 {
			continue
		}
		v = v * v * v
		u := rng.Float64()
		if u < 1-0.0331*x*x*x*x {
			return d * v
		}
		if math.Log(u) < 0.5*x*x+d*(1-v+math.Log(v)) {
			return d * v
		}
	}
}

// InvWishartWork returns the workspace length InvWishart needs for order n.
func InvWishartWork(n int) int { return 3*n*n + n }

// InvWishart writes into dst a draw from the inverse-Wishart distribution
// with df degrees of freedom and scale matrix scale (n x n), whose mean is
// scale/(df-n-1). It uses the Bartlett decomposition (Bartlett 1933; Odell &
// Feiveson 1966): if scale = C C' and A is lower triangular with
// A_ii^2 ~ chi-square(df-i) and A_ij ~ N(0,1) below the diagonal, then
// C A'^{-1} A^{-1} C' is the draw. It reports false when scale is not
// positive definite. work needs InvWishartWork(n).
func InvWishart(dst []float64, rng *rand.Rand, df float64, scale []float64, n int, work []float64) bool {
	c := work[:n*n]
	a := work[n*n : 2*n*n]
	m := work[2*n*n : 3*n*n]
	col := work[3*n*n : 3*n*n+n]
	copy(c, scale[:n*n])
	if !dense.Cholesky(c, n) {
		return false
	}
	for i := 0; i < n; i++ {
		for j := 0; j < n; j++ {
			switch {
			case j < i:
				a[i*n+j] = rng.NormFloat64()
			case j == i:
				a[i*n+j] = math.Sqrt(2 * Gamma(rng, 0.5*(df-float64(i))))
			default:
				a[i*n+j] = 0
			}
		}
	}
	// M = C A'^{-1}: row r of M solves A m_r = c_r (m_r' = c_r' A'^{-1}).
	for r := 0; r < n; r++ {
		copy(col, c[r*n:r*n+n])
		dense.SolveLower(a, n, col)
		copy(m[r*n:r*n+n], col)
	}
	dense.MulBT(dst, m, m, n, n, n)
	return true
}
