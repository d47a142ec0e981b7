package priors

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// TestGammaMoments checks mean and variance of Gamma(shape, 1) draws
// (mean = variance = shape) within 5 Monte Carlo standard errors,
// including shapes below 1 (boost branch).
func TestGammaMoments(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	const n = 200000
	for _, k := range []float64{0.3, 1, 2.5, 40} {
		var s, ss float64
		for range n {
			x := Gamma(rng, k)
			s += x
			ss += x * x
		}
		m := s / n
		v := ss/n - m*m
		if se := math.Sqrt(k / n); math.Abs(m-k) > 5*se {
			t.Errorf("Gamma(%g) mean = %.4f, want %g within %.4f", k, m, k, 5*se)
		}
		// Var of sample variance ~ (mu4 - sigma^4)/n, mu4 = 3k^2 + 6k for gamma.
		if se := math.Sqrt((3*k*k + 6*k - k*k) / n); math.Abs(v-k) > 5*se {
			t.Errorf("Gamma(%g) variance = %.4f, want %g within %.4f", k, v, k, 5*se)
		}
	}
}

// TestInvWishartMean checks E[IW(df, S)] = S/(df - n - 1) (Mardia, Kent &
// Bibby 1979, §3.8) and the variance of a diagonal element,
// 2 s_ii^2 / ((df-n-1)^2 (df-n-3)).
func TestInvWishartMean(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	const n, df, draws = 3, 9.0, 100000
	scale := []float64{2, 0.5, 0.2, 0.5, 1, -0.3, 0.2, -0.3, 1.5}
	work := make([]float64, InvWishartWork(n))
	dst := make([]float64, n*n)
	sum := make([]float64, n*n)
	sum2 := 0.0
	for range draws {
		if !InvWishart(dst, rng, df, scale, n, work) {
			t.Fatal("scale not positive definite")
		}
		for i := range sum {
			sum[i] += dst[i]
		}
		sum2 += dst[0] * dst[0]
	}
	d := df - n - 1
	for i := range sum {
		got, want := sum[i]/draws, scale[i]/d
		sd := math.Sqrt(2*scale[0]*scale[0]/(d*d*(d-2))) * math.Max(1, math.Abs(scale[i]/scale[0]))
		if math.Abs(got-want) > 5*sd/math.Sqrt(draws) {
			t.Errorf("E[IW][%d] = %.4f, want %.4f", i, got, want)
		}
	}
	m := sum[0] / draws
	v := sum2/draws - m*m
	wantV := 2 * scale[0] * scale[0] / (d * d * (d - 2))
	if math.Abs(v/wantV-1) > 0.1 {
		t.Errorf("Var[IW][0,0] = %.4f, want %.4f within 10%%", v, wantV)
	}
}

func TestLogInvGammaOfLogSD(t *testing.T) {
	// Integrating exp(density) over eta must match the normalizing
	// constant of the inverse-gamma(1,1) transformed to log sd: for
	// shape a, scale b the integral over eta of 2 v^{-a} e^{-b/v} ... =
	// Gamma(a)/b^a / 2 * 2 = Gamma(a) b^{-a} (checked by the trapezoid rule).
	for _, c := range []struct{ a, b float64 }{{1, 1}, {3, 2}} {
		s := 0.0
		h := 1e-3
		for eta := -10.0; eta < 10; eta += h {
			s += math.Exp(LogInvGammaOfLogSD(eta, c.a, c.b)) * h
		}
		want := math.Gamma(c.a) / math.Pow(c.b, c.a) / 2
		if math.Abs(s/want-1) > 1e-3 {
			t.Errorf("integral for IG(%g,%g) = %.6f, want %.6f", c.a, c.b, s, want)
		}
	}
}

func ExampleDefault() {
	for _, line := range Default().Describe(2) {
		fmt.Println(line)
	}
	// Output:
	// thresholds: independent normal(0, 5^2), kept in increasing order
	// occasion means: normal(0, 5^2)
	// carry-over and cross-lag paths: normal(0, 1^2)
	// random-intercept covariance: inverse-Wishart(df 3, scale 1 x identity)
	// correlations of innovations and of the first occasion: uniform over positive-definite correlation matrices
	// free variances (continuous outcomes): inverse-gamma(shape 1, scale 1)
}
