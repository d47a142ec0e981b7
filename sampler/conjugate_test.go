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
// exact posterior of the mean of a continuous outcome with a random
// intercept and AR(1) within-person residuals whose variances and
// autoregression are known. With y_i ~ N(theta 1, psi 11' + W) (W the
// AR(1) covariance, rows of missing cells dropped) and theta ~ N(0, 5^2),
// theta | y is normal with precision 1/25 + sum_i 1'V_i^{-1}1 and mean
// sum_i 1'V_i^{-1} y_i / precision (standard normal-normal conjugacy,
// e.g. Gelman et al. 2013, Bayesian Data Analysis, §3.5).
func TestConjugateMeanPosterior(t *testing.T) {
	const psi, a, s1, s2 = 0.5, 0.5, 1.2, 1.0
	tr := Truth{Names: []string{"y"}, Types: []model.OutcomeType{model.Continuous},
		Nu: nil, Psi: []float64{psi}, A: []float64{a}, Sigma: []float64{s2}, Sigma1: []float64{s1}, Missing: 0.15}
	rng := newRand(5)
	csv, err := Simulate(tr, 25, 5, rng)
	if err != nil {
		t.Fatal(err)
	}
	l := layoutFrom(t, `
data: {file: x.csv, person: person, occasion: occasion}
outcomes: [{name: y, type: continuous}]
within: {lags: own}
means: {over_time: equal}
`, csv)
	// Work on the standardized scale the sampler uses; known values are
	// stated there.
	st := NewState(l, rng)
	st.Psi[0] = psi
	st.A[1], st.A[2], st.A[3], st.A[4] = a, a, a, a
	st.SD[0][0], st.SD[1][0] = math.Sqrt(s1), math.Sqrt(s2)
	if err := st.Refresh(); err != nil {
		t.Fatal(err)
	}
	blocks := []Block{NewLatentBlock(l), NewInterceptBlock(l), NewLocationBlock(l), NewMeanBlock(l)}

	// Exact posterior on the standardized scale.
	prec, lin := 1/25.0, 0.0
	for i := 0; i < l.N; i++ {
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
		V := mat.NewSymDense(len(obs), nil)
		for p, tp := range obs {
			for q, tq := range obs {
				lo, hi := min(tp, tq), max(tp, tq)
				V.SetSym(p, q, psi+math.Pow(a, float64(hi-lo))*vt[lo])
			}
		}
		var inv mat.Dense
		if err := inv.Inverse(V); err != nil {
			t.Fatal(err)
		}
		for p := range obs {
			for q := range obs {
				prec += inv.At(p, q)
				lin += inv.At(p, q) * y[q]
			}
		}
	}
	wantMean, wantSD := lin/prec, 1/math.Sqrt(prec)

	const sweeps = 40000
	draws := make([]float64, 0, sweeps)
	for s := 0; s < sweeps+500; s++ {
		if err := Sweep(st, blocks, rng); err != nil {
			t.Fatal(err)
		}
		if s >= 500 {
			draws = append(draws, st.Mean[0])
		}
	}
	chains := [][]float64{draws}
	sm := diagnostics.Summarize(chains, 0.95)
	mcse := sm.MCSEMean
	if math.Abs(sm.Mean-wantMean) > 4*mcse {
		t.Errorf("posterior mean = %.4f, want %.4f (exact) within 4 MCSE = %.4f", sm.Mean, wantMean, 4*mcse)
	}
	// sd: relative error of a variance estimate from ESS draws is about sqrt(2/ESS).
	tol := 4 * math.Sqrt(2/sm.ESSBulk) / 2
	if math.Abs(sm.SD/wantSD-1) > tol {
		t.Errorf("posterior sd = %.4f, want %.4f (exact) within relative %.3f", sm.SD, wantSD, tol)
	}
	t.Logf("mean %.4f (exact %.4f), sd %.4f (exact %.4f), ESS %.0f", sm.Mean, wantMean, sm.SD, wantSD, sm.ESSBulk)
}
