package latentresp

import (
	"encoding/csv"
	"math"
	"math/rand/v2"
	"os"
	"slices"
	"strconv"
	"testing"
)

// stdTail returns P(Z > x) accurately far into the tail (math.Erfc keeps
// relative accuracy where 1 - Phi(x) would cancel).
func stdTail(x float64) float64 { return 0.5 * math.Erfc(x/math.Sqrt2) }

// truncCDF is the CDF of N(0,1) truncated to (a, b), evaluated on the
// side of zero that keeps precision.
func truncCDF(x, a, b float64) float64 {
	if a >= 0 {
		return (stdTail(a) - stdTail(x)) / (stdTail(a) - stdTail(b))
	}
	if b <= 0 {
		return (stdTail(-x) - stdTail(-a)) / (stdTail(-b) - stdTail(-a))
	}
	phi := func(v float64) float64 { return 0.5 * math.Erfc(-v/math.Sqrt2) }
	return (phi(x) - phi(a)) / (phi(b) - phi(a))
}

// ksStatistic returns the Kolmogorov-Smirnov distance of xs from cdf.
func ksStatistic(xs []float64, cdf func(float64) float64) float64 {
	s := slices.Clone(xs)
	slices.Sort(s)
	n := float64(len(s))
	d := 0.0
	for i, x := range s {
		f := cdf(x)
		d = math.Max(d, math.Max(f-float64(i)/n, float64(i+1)/n-f))
	}
	return d
}

// TestTruncStdNormalKS checks every proposal regime of the hybrid sampler,
// including intervals beyond 8 and 30 sd, with a Kolmogorov-Smirnov test
// at level 0.001 (critical value 1.95/sqrt(n), Massey 1951).
func TestTruncStdNormalKS(t *testing.T) {
	inf := math.Inf(1)
	cases := []struct {
		name string
		a, b float64
	}{
		{"whole line", -inf, inf},
		{"wide around zero", -3, 4},
		{"narrow around zero", -0.3, 0.5},
		{"upper half", 0, inf},
		{"lower half", -inf, 0},
		{"half-normal regime", 0.1, 3},
		{"narrow near zero", 0.1, 0.3},
		{"one-sided tail 2", 2, inf},
		{"two-sided tail 2..2.5", 2, 2.5},
		{"tail beyond 8 sd", 8.5, inf},
		{"narrow beyond 8 sd", 9, 9.2},
		{"wide beyond 8 sd", 8.2, 12},
		{"far tail 30 sd", 30, inf},
		{"far left tail", -inf, -9},
		{"left two-sided", -12, -10},
		{"tiny interval", 1.0, 1.0001},
	}
	rng := rand.New(rand.NewPCG(11, 12))
	const n = 40000
	crit := 1.95 / math.Sqrt(n)
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			xs := make([]float64, n)
			for i := range xs {
				x := TruncStdNormal(rng, c.a, c.b)
				if !(x > c.a && x < c.b) {
					t.Fatalf("draw %v outside (%v, %v)", x, c.a, c.b)
				}
				xs[i] = x
			}
			d := ksStatistic(xs, func(x float64) float64 { return truncCDF(x, c.a, c.b) })
			if d > crit {
				t.Errorf("KS distance on (%v, %v) = %.4f, want below %.4f", c.a, c.b, d, crit)
			}
		})
	}
}

// TestTruncNormalMoments compares sample means and variances with the
// 50-digit values of testdata/truncnorm_moments.csv (mpmath; project
// reference folder, handbook/), within 4 Monte Carlo standard errors.
func TestTruncNormalMoments(t *testing.T) {
	f, err := os.Open("testdata/truncnorm_moments.csv")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	recs, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	rng := rand.New(rand.NewPCG(3, 4))
	const n = 200000
	for _, r := range recs[1:] {
		v := make([]float64, 6)
		for i := range v {
			v[i], _ = strconv.ParseFloat(r[i], 64)
		}
		mu, sd, lo, hi, wantMean, wantVar := v[0], v[1], v[2], v[3], v[4], v[5]
		var s, ss float64
		for range n {
			x := TruncNormal(rng, mu, sd, lo, hi)
			s += x
			ss += x * x
		}
		m := s / n
		variance := ss/n - m*m
		seMean := math.Sqrt(wantVar / n)
		if math.Abs(m-wantMean) > 4*seMean {
			t.Errorf("mean of N(%g,%g^2) on (%g,%g) = %.6f, want %.6f within %.2g", mu, sd, lo, hi, m, wantMean, 4*seMean)
		}
		// Var of the sample variance is about 2 sigma^4/n for near-normal
		// shapes; allow 6 standard errors for the skewed tail cases.
		seVar := wantVar * math.Sqrt(2.0/n)
		if math.Abs(variance-wantVar) > 6*seVar {
			t.Errorf("variance of N(%g,%g^2) on (%g,%g) = %.6g, want %.6g within %.2g", mu, sd, lo, hi, variance, wantVar, 6*seVar)
		}
	}
}

func TestTruncStdNormalAllocs(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	allocs := testing.AllocsPerRun(100, func() { TruncStdNormal(rng, 3, 4) })
	if allocs != 0 {
		t.Errorf("TruncStdNormal allocates %v times per call, want 0", allocs)
	}
}

func BenchmarkTruncStdNormal(b *testing.B) {
	inf := math.Inf(1)
	for _, c := range []struct {
		name string
		a, b float64
	}{{"interior", -0.7, 0.4}, {"open-upper", 0.6, inf}, {"tail-9sd", 9, inf}, {"narrow", 1.2, 1.5}} {
		b.Run(c.name, func(b *testing.B) {
			rng := rand.New(rand.NewPCG(1, 2))
			s := 0.0
			for b.Loop() {
				s += TruncStdNormal(rng, c.a, c.b)
			}
			_ = s
		})
	}
}
