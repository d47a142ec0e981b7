package sampler

import (
	"fmt"
	"math"
	"testing"

	"github.com/lagstar/lagstar/model"
)

// truthValues maps the parameter names of l to their values in tr
// (equal-over-time paths and covariances).
func truthValues(tr Truth, l *Layout) map[string]float64 {
	J := l.J
	out := map[string]float64{}
	n := tr.Names
	for j := 0; j < J; j++ {
		for k, v := range tr.Tau[j] {
			out[fmt.Sprintf("threshold[%s,%d]", n[j], k+1)] = v
		}
		for t, o := range l.Panel.Occasions {
			nu := 0.0
			if tr.Nu != nil {
				nu = tr.Nu[t*J+j]
			}
			out[fmt.Sprintf("mean[%s,t=%d]", n[j], o)] = nu
			if t == 0 {
				out[fmt.Sprintf("mean[%s]", n[j])] = nu
			}
		}
		if tr.Psi != nil {
			out[fmt.Sprintf("ri_variance[%s]", n[j])] = tr.Psi[j*J+j]
		}
		out[fmt.Sprintf("innovation_variance[%s]", n[j])] = tr.Sigma[j*J+j]
		if tr.Sigma1 != nil {
			out[fmt.Sprintf("initial_variance[%s]", n[j])] = tr.Sigma1[j*J+j]
		}
		for k := 0; k < J; k++ {
			if tr.A != nil {
				if j == k {
					out[fmt.Sprintf("autoregression[%s]", n[j])] = tr.A[j*J+j]
				} else {
					out[fmt.Sprintf("crosslag[%s->%s]", n[k], n[j])] = tr.A[j*J+k]
				}
			}
			if k > j {
				corr := func(m []float64) float64 { return m[j*J+k] / math.Sqrt(m[j*J+j]*m[k*J+k]) }
				if tr.Psi != nil {
					out[fmt.Sprintf("ri_correlation[%s,%s]", n[j], n[k])] = corr(tr.Psi)
				}
				out[fmt.Sprintf("innovation_correlation[%s,%s]", n[j], n[k])] = corr(tr.Sigma)
				if tr.Sigma1 != nil {
					out[fmt.Sprintf("initial_correlation[%s,%s]", n[j], n[k])] = corr(tr.Sigma1)
				}
			}
		}
	}
	return out
}

// TestRecovery fits data simulated from known values and requires the 95%
// intervals to cover the truth for at least 90% of the parameters.
func TestRecovery(t *testing.T) {
	if testing.Short() {
		t.Skip("recovery fits skipped in -short mode")
	}
	cases := []recoveryCase{
		{
			name: "binary cross-lagged",
			yaml: `
data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: a, type: binary}, {name: b, type: binary}]
dynamics: {lags: cross}
means: {over_time: equal}
`,
			tr: Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Binary, model.Binary},
				Tau: [][]float64{{0.3}, {-0.4}}, Psi: []float64{0.9, 0.3, 0.3, 0.7},
				A: []float64{0.35, 0.2, 0, 0.3}, Sigma: []float64{1, 0.3, 0.3, 1}, Sigma1: []float64{1, 0.2, 0.2, 1}, Missing: 0.05},
			n: 500, periods: 6,
		},
		{
			name: "ordinal cross-lagged, means free over time",
			yaml: `
data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: a, type: ordinal, categories: 4, lowest: 0}, {name: b, type: ordinal, categories: 5, lowest: 0}]
dynamics: {lags: cross}
means: {over_time: free}
`,
			tr: Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Ordinal, model.Ordinal},
				Tau: [][]float64{{-0.8, 0.1, 0.9}, {-1.2, -0.4, 0.4, 1.3}},
				Nu:  []float64{0, 0, 0.2, -0.1, 0.3, -0.2, 0.35, -0.1, 0.5, 0.1},
				Psi: []float64{0.6, 0.2, 0.2, 0.8}, A: []float64{0.4, 0.15, -0.1, 0.25},
				Sigma: []float64{1, 0.25, 0.25, 1}, Sigma1: []float64{1, 0.3, 0.3, 1}, Missing: 0.05},
			n: 400, periods: 5,
		},
		{
			name: "mixed ordinal and continuous, stationary start",
			yaml: `
data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: mood, type: ordinal, categories: 5, lowest: 0}, {name: steps, type: continuous}]
dynamics: {lags: cross, first_occasion: stationary}
means: {over_time: equal}
`,
			tr: Truth{Names: []string{"mood", "steps"}, Types: []model.OutcomeType{model.Ordinal, model.Continuous},
				Tau: [][]float64{{-1.1, -0.3, 0.5, 1.2}, nil}, Nu: repeatPair(0, 50, 20),
				Psi: []float64{0.7, 2, 2, 36}, A: []float64{0.3, 0.02, 1.5, 0.4},
				Sigma: []float64{1, 3, 3, 64}, Missing: 0.05},
			n: 150, periods: 20,
		},
	}
	runRecovery(t, cases, 40, 7, func(c recoveryCase, l *Layout) map[string]float64 { return truthValues(c.tr, l) })
}

// recoveryCase is a model file and the values its data are simulated
// from.
type recoveryCase struct {
	name       string
	yaml       string
	tr         Truth
	n, periods int
}

// runRecovery simulates each case's panel (seed simSeed + its index),
// fits it (2 x 600 draws, seed fitSeed + index) and requires the 95%
// intervals to cover the true values truth gives.
func runRecovery(t *testing.T, cases []recoveryCase, simSeed, fitSeed uint64, truth func(recoveryCase, *Layout) map[string]float64) {
	for ci, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			csv, err := Simulate(c.tr, c.n, c.periods, newRand(simSeed+uint64(ci)))
			if err != nil {
				t.Fatal(err)
			}
			l := layoutFrom(t, c.yaml, csv)
			res := runFit(t, l, 2, 600, 600, fitSeed+uint64(ci))
			requireCoverage(t, res, truth(c, l))
		})
	}
}

// requireCoverage logs every parameter against its true value and
// requires the 95% intervals to cover at least 90% of them.
func requireCoverage(t *testing.T, res *Result, truth map[string]float64) {
	t.Helper()
	s := summarize(res)
	covered := 0
	for _, p := range res.Params {
		want, ok := truth[p.Name]
		if !ok {
			t.Fatalf("no true value for %s", p.Name)
		}
		got := s[p.Name]
		in := got.lo <= want && want <= got.hi
		if in {
			covered++
		}
		t.Logf("%-36s true %8.3f  mean %8.3f  95%% [%8.3f, %8.3f] %v", p.Name, want, got.mean, got.lo, got.hi, in)
	}
	if frac := float64(covered) / float64(len(res.Params)); frac < 0.9 {
		t.Errorf("95%% intervals cover %d of %d true values (%.0f%%), want at least 90%%", covered, len(res.Params), 100*frac)
	}
}

func repeatPair(a, b float64, n int) []float64 {
	out := make([]float64, 0, 2*n)
	for range n {
		out = append(out, a, b)
	}
	return out
}

// TestRecoveryMovingAverage fits ARMA(1,1) within parts (ordinal with
// random intercepts; two continuous outcomes with cross-lags and without
// random intercepts) to data simulated from known values and requires
// the 95% intervals to cover at least 90% of the true values.
func TestRecoveryMovingAverage(t *testing.T) {
	if testing.Short() {
		t.Skip("recovery fits skipped in -short mode")
	}
	cases := []recoveryCase{
		{
			name: "ordinal ARMA(1,1) with random intercepts",
			yaml: `
data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: y, type: ordinal, categories: 4, lowest: 0}]
dynamics: {lags: own, moving_average: true}
means: {over_time: equal}
`,
			tr: Truth{Names: []string{"y"}, Types: []model.OutcomeType{model.Ordinal},
				Tau: [][]float64{{-0.8, 0.1, 0.9}}, Psi: []float64{0.5},
				A: []float64{0.6}, MA: []float64{-0.35}, Sigma: []float64{1}, Sigma1: []float64{1}, Missing: 0.05},
			n: 300, periods: 10,
		},
		{
			name: "two continuous ARMA(1,1), cross-lagged, no random intercepts",
			yaml: `
data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: a, type: continuous}, {name: b, type: continuous}]
person_differences: {random_intercepts: false}
dynamics: {lags: cross, moving_average: true}
means: {over_time: equal}
`,
			tr: Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Continuous, model.Continuous}, Tau: [][]float64{nil, nil},
				A: []float64{0.5, 0.15, -0.1, 0.3}, MA: []float64{0.4, -0.3},
				Sigma: []float64{1, 0.3, 0.3, 1}, Sigma1: []float64{1.5, 0.2, 0.2, 1.2}, Missing: 0.05},
			n: 200, periods: 8,
		},
	}
	runRecovery(t, cases, 90, 17, func(c recoveryCase, l *Layout) map[string]float64 {
		truth := truthValues(c.tr, l)
		for j, m := range c.tr.MA {
			truth[fmt.Sprintf("moving_average[%s]", c.tr.Names[j])] = m
		}
		return truth
	})
}
