package sampler

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/priors"
	"gonum.org/v1/gonum/stat/distuv"
)

// Simulation-based calibration (Talts, Betancourt, Simpson, Vehtari &
// Gelman 2018, arXiv:1804.06788): parameters drawn from the prior, data
// from the model, posterior draws from the sampler; the rank of each true
// value among thinned posterior draws must be uniform.

// sbcPriors are tighter than the defaults so that prior draws give
// plausible data; the fit uses the same priors, as SBC requires.
func sbcPriors() priors.Set {
	return priors.Set{ThresholdSD: 1, MeanSD: 0.5, PathSD: 0.3, RIDfExtra: 4, RIScale: 3, VarShape: 3, VarScale: 2}
}

// sbcCase generates one replication: truth values by parameter name and a CSV.
type sbcCase struct {
	name    string
	yaml    string
	persons int
	times   int
	draw    func(rng *rand.Rand, pr priors.Set) (Truth, map[string]float64)
}

func drawThresholds(rng *rand.Rand, sd float64, n int) []float64 {
	t := make([]float64, n)
	for k := range t {
		t[k] = sd * rng.NormFloat64()
	}
	slices.Sort(t)
	return t
}

func drawPsi(rng *rand.Rand, pr priors.Set, J int) []float64 {
	psi := make([]float64, J*J)
	scale := make([]float64, J*J)
	for j := 0; j < J; j++ {
		scale[j*J+j] = pr.RIScale
	}
	priors.InvWishart(psi, rng, float64(J)+pr.RIDfExtra, scale, J, make([]float64, priors.InvWishartWork(J)))
	return psi
}

var sbcCases = []sbcCase{
	{
		name: "ordinal K=4 random-intercept AR(1)",
		yaml: `
data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: y, type: ordinal, categories: 4, lowest: 0}]
dynamics: {lags: own}
means: {over_time: equal}
`,
		persons: 40, times: 6,
		draw: func(rng *rand.Rand, pr priors.Set) (Truth, map[string]float64) {
			tau := drawThresholds(rng, pr.ThresholdSD, 3)
			psi := drawPsi(rng, pr, 1)
			a := pr.PathSD * rng.NormFloat64()
			tr := Truth{Names: []string{"y"}, Types: []model.OutcomeType{model.Ordinal}, Tau: [][]float64{tau},
				Psi: psi, A: []float64{a}, Sigma: []float64{1}, Sigma1: []float64{1}, Missing: 0.05}
			return tr, map[string]float64{"threshold[y,1]": tau[0], "threshold[y,2]": tau[1], "threshold[y,3]": tau[2],
				"ri_variance[y]": psi[0], "autoregression[y]": a}
		},
	},
	{
		name: "bivariate binary cross-lagged with random intercepts",
		yaml: `
data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: a, type: binary}, {name: b, type: binary}]
dynamics: {lags: cross, residual_correlation: true}
means: {over_time: equal}
`,
		persons: 60, times: 5,
		draw: func(rng *rand.Rand, pr priors.Set) (Truth, map[string]float64) {
			ta, tb := pr.ThresholdSD*rng.NormFloat64(), pr.ThresholdSD*rng.NormFloat64()
			psi := drawPsi(rng, pr, 2)
			A := make([]float64, 4)
			for k := range A {
				A[k] = pr.PathSD * rng.NormFloat64()
			}
			r, r1 := 2*rng.Float64()-1, 2*rng.Float64()-1
			tr := Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Binary, model.Binary},
				Tau: [][]float64{{ta}, {tb}}, Psi: psi, A: A, Sigma: []float64{1, r, r, 1}, Sigma1: []float64{1, r1, r1, 1}, Missing: 0.05}
			return tr, map[string]float64{"threshold[a,1]": ta, "threshold[b,1]": tb,
				"ri_variance[a]": psi[0], "ri_variance[b]": psi[3], "ri_correlation[a,b]": psi[1] / math.Sqrt(psi[0]*psi[3]),
				"autoregression[a]": A[0], "crosslag[b->a]": A[1], "crosslag[a->b]": A[2], "autoregression[b]": A[3],
				"innovation_correlation[a,b]": r, "initial_correlation[a,b]": r1}
		},
	},
	{
		name: "ordinal K=3 random-intercept AR(1), stationary start",
		yaml: `
data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: y, type: ordinal, categories: 3, lowest: 0}]
dynamics: {lags: own, first_occasion: stationary}
means: {over_time: equal}
`,
		persons: 40, times: 8,
		draw: func(rng *rand.Rand, pr priors.Set) (Truth, map[string]float64) {
			tau := drawThresholds(rng, pr.ThresholdSD, 2)
			psi := drawPsi(rng, pr, 1)
			a := pr.PathSD * rng.NormFloat64()
			for math.Abs(a) >= 1 {
				a = pr.PathSD * rng.NormFloat64()
			}
			tr := Truth{Names: []string{"y"}, Types: []model.OutcomeType{model.Ordinal}, Tau: [][]float64{tau},
				Psi: psi, A: []float64{a}, Sigma: []float64{1}, Missing: 0.05}
			return tr, map[string]float64{"threshold[y,1]": tau[0], "threshold[y,2]": tau[1],
				"ri_variance[y]": psi[0], "autoregression[y]": a}
		},
	},
}

// sbcRanks runs reps replications and returns, per parameter, the ranks of
// the truth among kept draws (0..kept).
func sbcRanks(t *testing.T, c sbcCase, reps, warmup, kept, thin int, seed uint64) map[string][]int {
	t.Helper()
	pr := sbcPriors()
	rng := rand.New(rand.NewPCG(seed, 99))
	ranks := map[string][]int{}
	for r := 0; r < reps; r++ {
		tr, truth := c.draw(rng, pr)
		csv, err := Simulate(tr, c.persons, c.times, rng)
		if err != nil {
			t.Fatal(err)
		}
		sp, err := model.ParseSpec("sbc.yaml", []byte(c.yaml))
		if err != nil {
			t.Fatal(err)
		}
		sp.AllowDegenerate = true // prior draws may leave a category empty
		pan, err := model.ParsePanel(sp, "sbc.csv", csv)
		if err != nil {
			t.Fatal(err)
		}
		l := NewLayout(sp, pan, pr)
		res, err := Run(context.Background(), l, Options{Chains: 1, Warmup: warmup, Draws: kept * thin, Seed: rng.Uint64(), ThresholdUpdate: model.ThresholdJoint})
		if err != nil {
			t.Fatalf("replication %d: %v", r, err)
		}
		np := len(res.Params)
		for p, par := range res.Params {
			want, ok := truth[par.Name]
			if !ok {
				t.Fatalf("no truth for %s", par.Name)
			}
			rank := 0
			for d := thin - 1; d < kept*thin; d += thin {
				if res.Draws[0][d*np+p] < want {
					rank++
				}
			}
			ranks[par.Name] = append(ranks[par.Name], rank)
		}
	}
	return ranks
}

// uniformityPValue is the chi-square test of rank uniformity over bins
// equal-width bins of 0..kept.
func uniformityPValue(ranks []int, kept, bins int) float64 {
	count := make([]float64, bins)
	for _, r := range ranks {
		count[r*bins/(kept+1)]++
	}
	e := float64(len(ranks)) / float64(bins)
	x2 := 0.0
	for _, c := range count {
		x2 += (c - e) * (c - e) / e
	}
	return distuv.ChiSquared{K: float64(bins - 1)}.Survival(x2)
}

func TestSBCShort(t *testing.T) {
	if testing.Short() {
		t.Skip("simulation-based calibration skipped in -short mode")
	}
	reps, kept, thin, bins := envInt("SBC_REPS", 160), 39, envInt("SBC_THIN", 25), 8
	for i, c := range sbcCases {
		t.Run(c.name, func(t *testing.T) {
			ranks := sbcRanks(t, c, reps, envInt("SBC_WARMUP", 1000), kept, thin, uint64(1000+i))
			names := make([]string, 0, len(ranks))
			for n := range ranks {
				names = append(names, n)
			}
			slices.Sort(names)
			// Bonferroni over the parameters of the case at family level 0.01.
			alpha := 0.01 / float64(len(names))
			for _, n := range names {
				p := uniformityPValue(ranks[n], kept, bins)
				t.Logf("%-32s rank-uniformity p = %.3f %s", n, p, histogram(ranks[n], kept, bins))
				if p < alpha {
					t.Errorf("%s: ranks not uniform, p = %.2g < %.2g", n, p, alpha)
				}
			}
		})
	}
}

func histogram(ranks []int, kept, bins int) string {
	count := make([]int, bins)
	for _, r := range ranks {
		count[r*bins/(kept+1)]++
	}
	return fmt.Sprint(count)
}
