package dense

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

func randSPD(rng *rand.Rand, n int) []float64 {
	b := make([]float64, n*n)
	for i := range b {
		b[i] = rng.NormFloat64()
	}
	a := make([]float64, n*n)
	MulBT(a, b, b, n, n, n)
	for i := 0; i < n; i++ {
		a[i*n+i] += float64(n)
	}
	return a
}

// TestInverseAgainstGonum compares Inverse and LogDetChol with gonum/mat.
func TestInverseAgainstGonum(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for n := 1; n <= 6; n++ {
		a := randSPD(rng, n)
		inv := make([]float64, n*n)
		chol := make([]float64, n*n)
		if !Inverse(inv, a, n, chol, make([]float64, n)) {
			t.Fatalf("n=%d: not positive definite", n)
		}
		var g mat.Dense
		if err := g.Inverse(mat.NewDense(n, n, a)); err != nil {
			t.Fatal(err)
		}
		for i := 0; i < n; i++ {
			for j := 0; j < n; j++ {
				if math.Abs(inv[i*n+j]-g.At(i, j)) > 1e-10 {
					t.Errorf("n=%d inverse[%d,%d] = %g, want %g (gonum)", n, i, j, inv[i*n+j], g.At(i, j))
				}
			}
		}
		if got, want := LogDetChol(chol, n), math.Log(mat.Det(mat.NewDense(n, n, a))); math.Abs(got-want) > 1e-10 {
			t.Errorf("n=%d logdet = %g, want %g", n, got, want)
		}
	}
	if Cholesky([]float64{1, 2, 2, 1}, 2) {
		t.Error("Cholesky accepted an indefinite matrix")
	}
}

// TestStationaryCov checks v = a v a' + s and the stability test.
func TestStationaryCov(t *testing.T) {
	a := []float64{0.5, 0.2, -0.1, 0.6}
	s := []float64{1, 0.3, 0.3, 2}
	v := make([]float64, 4)
	work := make([]float64, 12)
	if !SpectralRadiusBelowOne(a, 2, work) || !StationaryCov(v, a, s, 2, work) {
		t.Fatal("stable matrix rejected")
	}
	t1, t2 := make([]float64, 4), make([]float64, 4)
	Mul(t1, a, v, 2, 2, 2)
	MulBT(t2, t1, a, 2, 2, 2)
	for i := range v {
		if math.Abs(v[i]-(t2[i]+s[i])) > 1e-12 {
			t.Errorf("v[%d] = %g, want a v a' + s = %g", i, v[i], t2[i]+s[i])
		}
	}
	// Univariate closed form: s / (1 - a^2).
	v1 := make([]float64, 1)
	StationaryCov(v1, []float64{0.9}, []float64{1}, 1, work)
	if want := 1 / (1 - 0.81); math.Abs(v1[0]-want) > 1e-10 {
		t.Errorf("AR(1) stationary variance = %g, want %g", v1[0], want)
	}
	for _, c := range []struct {
		a    []float64
		want bool
	}{{[]float64{1.01}, false}, {[]float64{-0.999}, true}, {[]float64{0.5, 0.6, 0.6, 0.5}, false}, {[]float64{0, 2, -0.1, 0}, true}} {
		n := int(math.Sqrt(float64(len(c.a))))
		if got := SpectralRadiusBelowOne(c.a, n, work); got != c.want {
			t.Errorf("SpectralRadiusBelowOne(%v) = %v, want %v", c.a, got, c.want)
		}
	}
}

// TestEnvelopeCholesky checks the envelope factor of a banded matrix with
// a dense last row against the dense factor.
func TestEnvelopeCholesky(t *testing.T) {
	const p = 9
	a := make([]float64, p*p)
	for i := 0; i < p; i++ {
		a[i*p+i] = 4
		if i > 0 && i < p-1 {
			a[i*p+i-1], a[(i-1)*p+i] = -1, -1
		}
		if i < p-1 {
			a[(p-1)*p+i], a[i*p+p-1] = 0.3, 0.3
		}
	}
	first := make([]int, p)
	for i := range first {
		first[i] = max(i-1, 0)
	}
	first[p-1] = 0
	env := append([]float64(nil), a...)
	den := append([]float64(nil), a...)
	if !EnvelopeCholesky(env, p, first) || !Cholesky(den, p) {
		t.Fatal("factorization failed")
	}
	for i := 0; i < p; i++ {
		for j := first[i]; j <= i; j++ {
			if math.Abs(env[i*p+j]-den[i*p+j]) > 1e-12 {
				t.Errorf("L[%d,%d] = %g, want %g", i, j, env[i*p+j], den[i*p+j])
			}
		}
	}
	b := []float64{1, 2, 3, 4, 5, 6, 7, 8, 9}
	x := append([]float64(nil), b...)
	EnvelopeSolveLower(env, p, first, x)
	EnvelopeSolveUpperT(env, p, first, x)
	ax := make([]float64, p)
	MulVec(ax, a, x, p, p)
	for i := range b {
		if math.Abs(ax[i]-b[i]) > 1e-10 {
			t.Errorf("(A x)[%d] = %g, want %g", i, ax[i], b[i])
		}
	}
}

// TestSolveGeneral solves a non-symmetric system that needs pivoting (a
// zero in the first pivot) and checks a x = b; a singular matrix is
// refused.
func TestSolveGeneral(t *testing.T) {
	a := []float64{0, 2, 1, 1, -1, 3, 4, 0.5, -2}
	want := []float64{1.5, -2, 0.25}
	b := make([]float64, 3)
	MulVec(b, a, want, 3, 3)
	work := make([]float64, 9)
	if !SolveGeneral(a, 3, b, work) {
		t.Fatal("refused a regular matrix")
	}
	for k := range want {
		if math.Abs(b[k]-want[k]) > 1e-12 {
			t.Errorf("x[%d] = %g, want %g", k, b[k], want[k])
		}
	}
	if SolveGeneral([]float64{1, 2, 2, 4}, 2, []float64{1, 1}, work) {
		t.Error("accepted a singular matrix")
	}
}
