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
	"math/rand/v2"

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

// Points are the uniforms GHK averages over: Sets blocks of equal size in
// U, one after the other. From RandomizedPoints each block is unbiased and
// the blocks are independent, so the spread of the block averages gives
// the Monte Carlo error. Plain Monte Carlo uniforms are the case of one
// point per block.
type Points struct {
	U    [][]float64
	Sets int
}

// haltonDims is how many leading coordinates come from the Halton
// sequence; later ones are padded with independent uniforms. Halton points
// in high dimensions are strongly correlated between coordinates for the
// few hundred points GHK uses (the radical inverses in large primes
// increase almost linearly over the first points), which made the GHK
// error on a 42-day diary (84 coordinates) 2.4 times that of plain Monte
// Carlo; with the first 12 coordinates from Halton and the rest padded,
// it is as small as the better of the two at every length (measured in
// compare/ghk_test.go). Padding a low-discrepancy sequence with random
// coordinates: Spanier (1995), Owen (1998, ACM TOMACS 8:71) (from memory).
const haltonDims = 12

// RandomizedPoints returns sets blocks of R/sets points (at least 1) in n
// dimensions: the first haltonDims coordinates are the first points of the
// Halton sequence shifted by a uniform vector modulo 1, one shift per
// block (Cranley & Patterson 1976; randomized quasi-Monte Carlo, L'Ecuyer
// & Lemieux 2002); the other coordinates are independent uniforms. All
// come from a PCG stream seeded with seed, so every posterior draw can use
// the same points.
func RandomizedPoints(R, n, sets int, seed uint64) Points {
	sets = max(1, min(sets, R))
	per := max(R/sets, 1)
	h := min(n, haltonDims)
	base := Halton(per, h)
	rng := rand.New(rand.NewPCG(seed, 0x67686b))
	u := make([][]float64, 0, per*sets)
	shift := make([]float64, h)
	for range sets {
		for k := range shift {
			shift[k] = rng.Float64()
		}
		for _, b := range base {
			row := make([]float64, n)
			for k := range row {
				v := rng.Float64()
				if k < h {
					v = b[k] + shift[k]
					if v >= 1 {
						v--
					}
				}
				// Keep away from 0 and 1, where the normal quantile is infinite.
				row[k] = min(max(v, 1e-15), 1-1e-15)
			}
			u = append(u, row)
		}
	}
	return Points{U: u, Sets: sets}
}

// GHK estimates log P(lo < X < hi) for X ~ N(mu, L L') (L lower triangular,
// n x n row-major) by the GHK simulator averaged over the points. It
// returns the log of the average of the products and the relative standard
// error of that average, from the spread of the block averages.
func GHK(mu, L, lo, hi []float64, n int, pts Points, e []float64) (logP, relSE float64) {
	per := len(pts.U) / pts.Sets
	var sum, sumSq float64
	for s := 0; s < pts.Sets; s++ {
		blk := 0.0
		for _, ur := range pts.U[s*per : (s+1)*per] {
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
			blk += prod
		}
		blk /= float64(per)
		sum += blk
		sumSq += blk * blk
	}
	S := float64(pts.Sets)
	mean := sum / S
	if mean <= 0 {
		return math.Inf(-1), math.Inf(1)
	}
	if pts.Sets < 2 {
		return math.Log(mean), math.NaN()
	}
	v := math.Max(sumSq-S*mean*mean, 0) / (S - 1) / S
	return math.Log(mean), math.Sqrt(v) / mean
}

// Halton returns R points of the n-dimensional Halton sequence (radical
// inverses in the first n primes), skipping the first 20 points.
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
