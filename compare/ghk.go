// Package compare ranks fitted models by their predictive accuracy for new
// persons: the person-level log likelihood with random intercepts and
// within-person paths integrated out (a multivariate-normal rectangle
// probability, by the GHK simulator: Geweke 1991; Hajivassiliou 1990;
// Keane 1994), then PSIS-LOO (Vehtari, Gelman & Gabry 2017; Vehtari,
// Simpson, Gelman, Yao & Gabry 2024) and WAIC (Watanabe 2010) with their
// standard errors, and differences between models.
package compare

import (
	"math"

	"gonum.org/v1/gonum/mathext"
)

// phi and q are the standard normal CDF and survival function.
func phi(x float64) float64 { return 0.5 * math.Erfc(-x/math.Sqrt2) }
func q(x float64) float64   { return 0.5 * math.Erfc(x/math.Sqrt2) }

// ghkTerm returns P(a < Z < b) and, for a uniform u, the draw of Z from
// N(0,1) truncated to (a, b) by the inverse CDF, computed on the side of
// zero that keeps precision in the tails.
func ghkTerm(a, b, u float64) (float64, float64) {
	if a >= 0 {
		qa, qb := q(a), q(b)
		p := qa - qb
		return p, -mathext.NormalQuantile(qa - u*p)
	}
	pa, pb := phi(a), phi(b)
	p := pb - pa
	return p, mathext.NormalQuantile(pa + u*p)
}

// GHK estimates log P(lo < X < hi) for X ~ N(mu, L L') (L lower triangular,
// n x n row-major) by the GHK simulator with the R rows of u (uniforms,
// length n each) as its random numbers. It returns the log of the average
// of the R products and the relative standard error of that average.
func GHK(mu, L, lo, hi []float64, n int, u [][]float64, e []float64) (logP, relSE float64) {
	var sum, sum2 float64
	for _, ur := range u {
		prod := 1.0
		for k := 0; k < n; k++ {
			m := mu[k]
			for j := 0; j < k; j++ {
				m += L[k*n+j] * e[j]
			}
			d := L[k*n+k]
			p, z := ghkTerm((lo[k]-m)/d, (hi[k]-m)/d, ur[k])
			prod *= p
			if prod == 0 {
				break
			}
			e[k] = z
		}
		sum += prod
		sum2 += prod * prod
	}
	R := float64(len(u))
	mean := sum / R
	if mean <= 0 {
		return math.Inf(-1), math.Inf(1)
	}
	v := math.Max(sum2/R-mean*mean, 0) / R
	return math.Log(mean), math.Sqrt(v) / mean
}

// Halton returns R points of the n-dimensional Halton sequence (radical
// inverses in the first n primes), skipping the first 20 points, as
// quasi-random uniforms for GHK.
func Halton(R, n int) [][]float64 {
	primes := firstPrimes(n)
	out := make([][]float64, R)
	for r := range out {
		out[r] = make([]float64, n)
		for k, p := range primes {
			out[r][k] = radicalInverse(r+21, p)
		}
	}
	return out
}

func radicalInverse(i, base int) float64 {
	f, x := 1.0, 0.0
	for i > 0 {
		f /= float64(base)
		x += f * float64(i%base)
		i /= base
	}
	return x
}

func firstPrimes(n int) []int {
	var ps []int
	for c := 2; len(ps) < n; c++ {
		prime := true
		for _, p := range ps {
			if p*p > c {
				break
			}
			if c%p == 0 {
				prime = false
				break
			}
		}
		if prime {
			ps = append(ps, c)
		}
	}
	return ps
}
