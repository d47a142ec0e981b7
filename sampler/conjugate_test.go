package sampler

import (
	"math"
	"testing"

	"github.com/lagstar/lagstar/diagnostics"
	"github.com/lagstar/lagstar/model"
	"gonum.org/v1/gonum/mat"
)

// TestConjugateMeanPosterior checks the Gibbs blocks for latent responses
// (missing cells), random intercepts, location moves and means against the
// exact posterior of a continuous outcome with a random intercept and AR(1)
// within-person residuals whose variances and autoregression are known.
// With beta = (theta, b_1..b_N), y_i = theta 1 + b_i 1 + w_i,
// w_i ~ N(0, W_i) (W_i the AR(1) covariance, rows of missing cells
// dropped), theta ~ N(0, 5^2) and b_i ~ N(0, psi), the posterior of beta is
// normal with precision D^{-1} + X'W^{-1}X and mean P^{-1} X'W^{-1} y
// (the linear-Gaussian model, e.g. Gelman et al. 2013, Bayesian Data
// Analysis, §14.8). The mean and sd of theta and of b_1 are compared.
func TestConjugateMeanPosterior(t *testing.T) {
	const psi, a, s1, s2 = 0.5, 0.5, 2.5, 0.6
	tr := Truth{Names: []string{"y"}, Types: []model.OutcomeType{model.Continuous},
		Nu: nil, Psi: []float64{psi}, A: []float64{a}, Sigma: []float64{s2}, Sigma1: []float64{s1}, Missing: 0.15}
	rng := newRand(5)
	csv, err := Simulate(tr, 25, 5, rng)
	if err != nil {
		t.Fatal(err)
	}
	l := layoutFrom(t, `
data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: y, type: continuous}]
dynamics: {lags: own}
means: {over_time: equal}
`, csv)
	// Work on the standardized scale the sampler uses; known values are
	// stated there.
	st := NewState(l, rng)
	st.Psi[0] = psi
	for u := 1; u < l.T; u++ {
		st.A[u] = a
	}
	st.SD[l.GroupOf[0]][0], st.SD[l.GroupOf[1]][0] = math.Sqrt(s1), math.Sqrt(s2)
	if err := st.Refresh(); err != nil {
		t.Fatal(err)
	}
	blocks := []Block{NewLatentBlock(l), NewInterceptBlock(l), NewLocationBlock(l), NewMeanBlock(l)}

	// Exact posterior on the standardized scale.
	p := 1 + l.N
	prec := mat.NewSymDense(p, nil)
	lin := mat.NewVecDense(p, nil)
	prec.SetSym(0, 0, 1/25.0)
	for i := 0; i < l.N; i++ {
		prec.SetSym(1+i, 1+i, 1/psi)
		var obs []int
		var y []float64
		for t := 0; t < l.Panel.Len[i]; t++ {
			if v := st.Y[l.Panel.Offset[i]+t]; !math.IsNaN(v) {
				obs = append(obs, t)
				y = append(y, v)
			}
		}
		vt := make([]float64, l.Panel.Len[i])
		vt[0] = s1
		for t := 1; t < len(vt); t++ {
			vt[t] = a*a*vt[t-1] + s2
		}
		W := mat.NewSymDense(len(obs), nil)
		for p, tp := range obs {
			for q, tq := range obs {
				lo, hi := min(tp, tq), max(tp, tq)
				W.SetSym(p, q, math.Pow(a, float64(hi-lo))*vt[lo])
			}
		}
		var inv mat.Dense
		if err := inv.Inverse(W); err != nil {
			t.Fatal(err)
		}
		// X_i has ones in columns 0 (theta) and 1+i (b_i).
		sum, sumY := 0.0, 0.0
		for p := range obs {
			for q := range obs {
				sum += inv.At(p, q)
				sumY += inv.At(p, q) * y[q]
			}
		}
		prec.SetSym(0, 0, prec.At(0, 0)+sum)
		prec.SetSym(1+i, 1+i, prec.At(1+i, 1+i)+sum)
		prec.SetSym(0, 1+i, sum)
		lin.SetVec(0, lin.AtVec(0)+sumY)
		lin.SetVec(1+i, sumY)
	}
	var cov mat.Dense
	if err := cov.Inverse(prec); err != nil {
		t.Fatal(err)
	}
	var mean mat.VecDense
	mean.MulVec(&cov, lin)

	const sweeps = 40000
	theta := make([]float64, 0, sweeps)
	b1 := make([]float64, 0, sweeps)
	for s := 0; s < sweeps+500; s++ {
		if err := Sweep(st, blocks, rng); err != nil {
			t.Fatal(err)
		}
		if s >= 500 {
			theta = append(theta, st.Mean[0])
			b1 = append(b1, st.B[0])
		}
	}
	for k, draws := range [][]float64{theta, b1} {
		name := []string{"theta", "b_1"}[k]
		sm := diagnostics.Summarize([][]float64{draws}, 0.95)
		wantMean, wantSD := mean.AtVec(k), math.Sqrt(cov.At(k, k))
		if math.Abs(sm.Mean-wantMean) > 4*sm.MCSEMean {
			t.Errorf("%s: posterior mean = %.4f, want %.4f (exact) within 4 MCSE = %.4f", name, sm.Mean, wantMean, 4*sm.MCSEMean)
		}
		// The relative error of an sd estimated from ESS draws is about 1/sqrt(2 ESS).
		tol := 4 / math.Sqrt(2*sm.ESSBulk)
		if math.Abs(sm.SD/wantSD-1) > tol {
			t.Errorf("%s: posterior sd = %.4f, want %.4f (exact) within relative %.3f", name, sm.SD, wantSD, tol)
		}
		t.Logf("%s: mean %.4f (exact %.4f), sd %.4f (exact %.4f), ESS %.0f", name, sm.Mean, wantMean, sm.SD, wantSD, sm.ESSBulk)
	}
}
