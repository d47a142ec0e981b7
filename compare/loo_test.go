package compare

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestLOOExactNormal: for y_i ~ N(theta, 1) with a flat prior, the exact
// leave-one-out predictive of y_i is N(mean_{-i}, 1 + 1/(n-1)). PSIS-LOO
// from posterior draws theta ~ N(ybar, 1/n) must match it.
func TestLOOExactNormal(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	const n, S = 30, 4000
	y := make([]float64, n)
	for i := range y {
		y[i] = rng.NormFloat64() + 0.5
	}
	y[0] = 4 // an outlier, for a harder case
	sum := 0.0
	for _, v := range y {
		sum += v
	}
	ybar := sum / n
	theta := make([]float64, S)
	for s := range theta {
		theta[s] = ybar + rng.NormFloat64()/math.Sqrt(n)
	}
	var gotLOO, wantLOO, gotWAIC float64
	maxK := 0.0
	for i := range y {
		ll := make([]float64, S)
		for s := range ll {
			d := y[i] - theta[s]
			ll[s] = -0.5*math.Log(2*math.Pi) - 0.5*d*d
		}
		l, k := PointwiseLOO(ll)
		gotLOO += l
		gotWAIC += PointwiseWAIC(ll)
		maxK = math.Max(maxK, k)
		m := (sum - y[i]) / (n - 1)
		v := 1 + 1.0/(n-1)
		wantLOO += -0.5*math.Log(2*math.Pi*v) - 0.5*(y[i]-m)*(y[i]-m)/v
	}
	t.Logf("elpd_loo %.4f (exact %.4f), elpd_waic %.4f, max k %.2f", gotLOO, wantLOO, gotWAIC, maxK)
	if math.Abs(gotLOO-wantLOO) > 0.05 {
		t.Errorf("elpd_loo = %.4f, want %.4f (exact) within 0.05", gotLOO, wantLOO)
	}
	if math.Abs(gotWAIC-wantLOO) > 0.2 {
		t.Errorf("elpd_waic = %.4f, want near %.4f", gotWAIC, wantLOO)
	}
	if maxK > 0.7 {
		t.Errorf("max Pareto k %.2f in an easy problem", maxK)
	}
}

// TestPSISHeavyTailK: importance ratios with a heavy (Pareto, shape 0.8)
// tail must give a k estimate near 0.8.
func TestPSISHeavyTailK(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	const S = 4000
	lr := make([]float64, S)
	for i := range lr {
		u := rng.Float64()
		lr[i] = math.Log((math.Pow(1-u, -0.8) - 1) / 0.8) // GPD(k=0.8, sigma=1) draws
	}
	_, k := PSIS(lr)
	if math.Abs(k-0.8) > 0.2 {
		t.Errorf("k = %.2f, want 0.8 within 0.2", k)
	}
}
