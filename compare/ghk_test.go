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
	u := RandomizedPoints(4000, 2, 10, 1)
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
	got, rel := GHK(mu, L, lo, hi, 3, RandomizedPoints(5000, 3, 10, 2), make([]float64, 3))
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
		got, rel := GHK(mu, L, lo, hi, n, RandomizedPoints(300, n, 10, seed), make([]float64, n))
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

// diaryBox is the latent covariance (Cholesky factor) and answer intervals
// of one person's invented diary of T days with two outcomes (five
// categories and yes/no): random intercepts, cross-lagged VAR(1) within
// paths with a stationary start, answers drawn from the model.
func diaryBox(T int, seed uint64) (mu, L, lo, hi []float64, n int) {
	const J = 2
	n = T * J
	psi := []float64{0.67, -0.2, -0.2, 0.53}
	A := []float64{0.35, -0.1, -0.14, 0.25}
	sig := []float64{1, -0.23, -0.23, 1}
	V := make([]float64, 4)
	dense.StationaryCov(V, A, sig, J, make([]float64, 3*J*J))
	// Cov(w_t, w_s) = A^{t-s} V for t >= s.
	pow := make([][]float64, T)
	pow[0] = []float64{1, 0, 0, 1}
	for k := 1; k < T; k++ {
		pow[k] = make([]float64, 4)
		dense.Mul(pow[k], A, pow[k-1], J, J, J)
	}
	S := make([]float64, n*n)
	cv := make([]float64, 4)
	for t := 0; t < T; t++ {
		for s := 0; s <= t; s++ {
			dense.Mul(cv, pow[t-s], V, J, J, J)
			for a := 0; a < J; a++ {
				for b := 0; b < J; b++ {
					S[(t*J+a)*n+s*J+b] = psi[a*J+b] + cv[a*J+b]
					S[(s*J+b)*n+t*J+a] = psi[a*J+b] + cv[a*J+b]
				}
			}
		}
	}
	L = S
	if !dense.Cholesky(L, n) {
		panic("diaryBox: not positive definite")
	}
	rng := rand.New(rand.NewPCG(seed, 3))
	z, y := make([]float64, n), make([]float64, n)
	for k := range z {
		z[k] = rng.NormFloat64()
	}
	dense.MulVec(y, L, z, n, n)
	mu, lo, hi = make([]float64, n), make([]float64, n), make([]float64, n)
	tau := [][]float64{{-1.18, -0.28, 0.58, 1.44}, {0.96}}
	for k := range y {
		lo[k], hi[k] = math.Inf(-1), math.Inf(1)
		for _, c := range tau[k%J] {
			if y[k] > c {
				lo[k] = c
			} else {
				hi[k] = c
				break
			}
		}
	}
	return mu, L, lo, hi, n
}

// TestGHKPointsShortAndLong: the padded points beat plain Monte Carlo on a
// short record (6 days, 12 coordinates: all from Halton) and match it on a
// 42-day diary (84 coordinates), where Halton points in every coordinate
// (shifted, ten sets) did 2.4 times worse. Spread of the GHK log
// probability over 30 independent randomizations, 300 points each.
func TestGHKPointsShortAndLong(t *testing.T) {
	spread := func(T int, points func(n int, seed uint64) Points) float64 {
		mu, L, lo, hi, n := diaryBox(T, 1)
		var x []float64
		for seed := uint64(1); seed <= 30; seed++ {
			v, _ := GHK(mu, L, lo, hi, n, points(n, seed), make([]float64, n))
			x = append(x, v)
		}
		return stat.StdDev(x, nil)
	}
	padded := func(n int, seed uint64) Points { return RandomizedPoints(300, n, 10, seed) }
	iid := func(n int, seed uint64) Points {
		rng := rand.New(rand.NewPCG(seed, 77))
		u := make([][]float64, 300)
		for r := range u {
			u[r] = make([]float64, n)
			for k := range u[r] {
				u[r][k] = rng.Float64()
			}
		}
		return Points{U: u, Sets: 300}
	}
	allHalton := func(n int, seed uint64) Points {
		rng := rand.New(rand.NewPCG(seed, 55))
		base := Halton(30, n)
		var u [][]float64
		for range 10 {
			shift := make([]float64, n)
			for k := range shift {
				shift[k] = rng.Float64()
			}
			for _, b := range base {
				row := make([]float64, n)
				for k := range row {
					row[k] = math.Mod(b[k]+shift[k], 1)
				}
				u = append(u, row)
			}
		}
		return Points{U: u, Sets: 10}
	}
	short, shortIID := spread(6, padded), spread(6, iid)
	long, longIID, longHalton := spread(42, padded), spread(42, iid), spread(42, allHalton)
	t.Logf("6 days: padded %.4f, plain Monte Carlo %.4f; 42 days: padded %.4f, plain %.4f, Halton throughout %.4f", short, shortIID, long, longIID, longHalton)
	if short > 0.8*shortIID {
		t.Errorf("6 days: padded points spread %.4f, not clearly below plain Monte Carlo's %.4f", short, shortIID)
	}
	if long > 1.25*longIID || long > 0.6*longHalton {
		t.Errorf("42 days: padded points spread %.4f against plain Monte Carlo %.4f and Halton throughout %.4f", long, longIID, longHalton)
	}
}
