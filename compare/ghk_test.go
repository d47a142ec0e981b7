package compare

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/lagstar/lagstar/internal/dense"
	"gonum.org/v1/gonum/integrate/quad"
	"gonum.org/v1/gonum/stat"
)

// bivariateRect returns P(lo < X < hi) for a bivariate normal with unit
// variances and correlation rho by one-dimensional quadrature of
// phi(x) [Phi((b2 - rho x)/s) - Phi((a2 - rho x)/s)] over (a1, b1).
func bivariateRect(rho float64, lo, hi []float64) float64 {
	s := math.Sqrt(1 - rho*rho)
	f := func(x float64) float64 {
		return math.Exp(-x*x/2) / math.Sqrt(2*math.Pi) * (phi((hi[1]-rho*x)/s) - phi((lo[1]-rho*x)/s))
	}
	a, b := math.Max(lo[0], -12), math.Min(hi[0], 12)
	return quad.Fixed(f, a, b, 2000, nil, 0)
}

// TestGHKBivariateExact compares GHK with the exact bivariate normal
// rectangle probability (quadrature), including one-sided and tail boxes.
func TestGHKBivariateExact(t *testing.T) {
	inf := math.Inf(1)
	u := RandomizedHalton(4000, 2, 10, 1)
	e := make([]float64, 2)
	for _, c := range []struct {
		rho    float64
		lo, hi []float64
	}{
		{0.5, []float64{-inf, -inf}, []float64{0, 0}},
		{-0.7, []float64{0.2, -1}, []float64{1.5, inf}},
		{0.9, []float64{2, 2}, []float64{inf, inf}},
		{0.3, []float64{-0.5, -0.5}, []float64{0.5, 0.5}},
	} {
		L := []float64{1, 0, c.rho, 1}
		if !dense.Cholesky(L, 2) {
			t.Fatal("not positive definite")
		}
		got, rel := GHK([]float64{0, 0}, L, c.lo, c.hi, 2, u, e)
		want := math.Log(bivariateRect(c.rho, c.lo, c.hi))
		if math.Abs(got-want) > 4*rel+1e-3 {
			t.Errorf("rho %.1f box %v-%v: log P = %.5f (GHK, rel. se %.2g), want %.5f (quadrature)", c.rho, c.lo, c.hi, got, rel, want)
		}
	}
}

// TestGHKTrivariateMonteCarlo compares GHK with brute-force Monte Carlo
// on a trivariate box.
func TestGHKTrivariateMonteCarlo(t *testing.T) {
	S := []float64{1, 0.5, 0.3, 0.5, 1.2, -0.4, 0.3, -0.4, 0.8}
	L := append([]float64(nil), S...)
	dense.Cholesky(L, 3)
	mu := []float64{0.2, -0.1, 0.3}
	lo := []float64{-0.5, math.Inf(-1), 0}
	hi := []float64{1, 0.4, math.Inf(1)}
	got, rel := GHK(mu, L, lo, hi, 3, RandomizedHalton(5000, 3, 10, 2), make([]float64, 3))
	rng := rand.New(rand.NewPCG(1, 2))
	const n = 2_000_000
	hit := 0
	x := make([]float64, 3)
	z := make([]float64, 3)
	for range n {
		for k := range z {
			z[k] = rng.NormFloat64()
		}
		dense.MulVec(x, L, z, 3, 3)
		in := true
		for k := range x {
			v := x[k] + mu[k]
			if v <= lo[k] || v >= hi[k] {
				in = false
				break
			}
		}
		if in {
			hit++
		}
	}
	p := float64(hit) / n
	se := math.Sqrt(p*(1-p)/n) / p
	if math.Abs(got-math.Log(p)) > 4*math.Hypot(se, rel) {
		t.Errorf("log P = %.5f (GHK), brute force %.5f (rel. se %.2g)", got, math.Log(p), se)
	}
}

// TestGHKErrorHonest: on a 24-dimensional box (an AR(1) path of binary
// answers plus a random intercept), the relative standard error GHK
// reports matches the spread of its estimates over independent
// randomizations of the points.
func TestGHKErrorHonest(t *testing.T) {
	const n = 24
	S := make([]float64, n*n)
	for a := 0; a < n; a++ {
		for b := 0; b < n; b++ {
			S[a*n+b] = 1 + math.Pow(0.5, math.Abs(float64(a-b)))/(1-0.25)
		}
	}
	L := append([]float64(nil), S...)
	if !dense.Cholesky(L, n) {
		t.Fatal("not positive definite")
	}
	mu, lo, hi := make([]float64, n), make([]float64, n), make([]float64, n)
	for k := range lo {
		if k%3 == 0 {
			lo[k], hi[k] = math.Inf(-1), 0.3
		} else {
			lo[k], hi[k] = 0.3, math.Inf(1)
		}
	}
	var ests, rels []float64
	for seed := uint64(1); seed <= 60; seed++ {
		got, rel := GHK(mu, L, lo, hi, n, RandomizedHalton(300, n, 10, seed), make([]float64, n))
		ests = append(ests, got)
		rels = append(rels, rel)
	}
	sd := stat.StdDev(ests, nil)
	reported := stat.Mean(rels, nil) // relative se of P = se of log P, to first order
	if r := reported / sd; r < 0.6 || r > 1.6 {
		t.Errorf("reported se %.4f against the spread over randomizations %.4f (ratio %.2f)", reported, sd, r)
	}
	t.Logf("log P about %.3f: reported se %.4f, spread %.4f", stat.Mean(ests, nil), reported, sd)
}
