package bvn

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/integrate/quad"
)

// upperByQuadrature is P(X > h, Y > k) as a one-dimensional integral,
// int_h^inf phi(x) Phi((r x - k) / sqrt(1 - r^2)) dx, by 2000-point
// Gauss-Legendre quadrature on [h, 9]: an independent computation.
func upperByQuadrature(h, k, r float64) float64 {
	s := math.Sqrt(1 - r*r)
	f := func(x float64) float64 {
		return math.Exp(-x*x/2) / math.Sqrt(2*math.Pi) * phi((r*x-k)/s)
	}
	return quad.Fixed(f, math.Max(h, -9), 9, 2000, quad.Legendre{}, 0)
}

// TestUpperAgainstQuadrature: the orthant probabilities agree with the
// quadrature to 1e-8 over correlations from -0.99 to 0.99 (each branch of
// the method) and bounds from -2.5 to 2.5; the special cases are exact.
func TestUpperAgainstQuadrature(t *testing.T) {
	for _, r := range []float64{-0.99, -0.95, -0.8, -0.5, -0.2, 0, 0.1, 0.4, 0.7, 0.8, 0.93, 0.97, 0.99} {
		for _, h := range []float64{-2.5, -1, -0.3, 0, 0.6, 2.5} {
			for _, k := range []float64{-2, -0.5, 0, 0.2, 1.4} {
				got, want := Upper(h, k, r), upperByQuadrature(h, k, r)
				if math.Abs(got-want) > 1e-8 {
					t.Errorf("Upper(%g, %g, %g) = %.12f, quadrature %.12f", h, k, r, got, want)
				}
			}
		}
	}
	if got := Upper(0, 0, 0.5); math.Abs(got-(0.25+math.Asin(0.5)/(2*math.Pi))) > 1e-12 {
		t.Errorf("Upper(0, 0, 0.5) = %g, want 1/4 + asin(1/2)/(2 pi) (Sheppard)", got)
	}
	if got := Rect(math.Inf(-1), math.Inf(1), -0.3, 0.8, 0.6); math.Abs(got-(phi(0.8)-phi(-0.3))) > 1e-12 {
		t.Errorf("Rect with X unbounded = %g, want the Y margin", got)
	}
}
