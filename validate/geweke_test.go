package validate

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/sampler"
)

// redrawData replaces the state's data, latent responses and random
// intercepts by a draw from p(y, y*, b | parameters): the data step of
// Geweke's successive-conditional simulator.
func redrawData(st *sampler.State, rng *rand.Rand, y []float64) {
	st.ReplicateFactors(y, st.Ystar, st.B, st.G, rng)
	copy(st.Y, y)
}

// TestGewekeJointDistribution is Geweke's (2004, JASA 99:799) test of the
// full sampler on a small ordinal + binary cross-lagged random-intercept
// model: the marginal-conditional simulator (parameters from the prior)
// and the successive-conditional simulator (alternating a data draw given
// the parameters with one sweep of every Gibbs block) must give the same
// means of every parameter and of its square. Standard errors of the
// successive-conditional means use batch means; the threshold is
// Bonferroni over all test functions at family-wise level 0.01.
//
// Two cases: means equal over time, and means free over time (which adds
// the level moves of thresholds against free means). Both include the
// interweaving move of the random-intercept scales (two outcomes); the
// test fails when that move's prior exponent or its linear term is off.
func TestGewekeJointDistribution(t *testing.T) {
	if testing.Short() {
		t.Skip("Geweke test skipped in -short mode")
	}
	const pair = `[{name: mood, type: ordinal, categories: 3, lowest: 0}, {name: ache, type: binary}]`
	for _, c := range []struct {
		name, within, means string
		opt                 sampler.Options
	}{
		{"means equal", cross, eqM, sampler.Options{ThresholdUpdate: model.ThresholdJoint}},
		{"means free", cross, "over_time: free", sampler.Options{ThresholdUpdate: model.ThresholdJoint}},
		// The ARMA(1,1) blocks (sampler/movingavg.go), with the collapsed
		// move of the moving averages and paths.
		{"moving average", cross + ", moving_average: true", "over_time: free", sampler.Options{ThresholdUpdate: model.ThresholdJoint}},
		// Growth (sampler/growth.go): the factors drawn with their means
		// integrated out, their covariance, the scale move with slopes.
		{"growth", cross, "", sampler.Options{ThresholdUpdate: model.ThresholdJoint}},
		// Lagged latent response (sampler/dynamic.go): intercepts,
		// first-occasion loadings and carry-over of the dynamic form,
		// the random intercepts with its design.
		{"latent lag", cross + ", lag_on: latent_response", "over_time: free", sampler.Options{ThresholdUpdate: model.ThresholdJoint}},
		{"latent lag, own", "lags: own, lag_on: latent_response", eqM, sampler.Options{ThresholdUpdate: model.ThresholdJoint}},
		{"latent lag, no random intercepts", cross + ", lag_on: latent_response", "over_time: free", sampler.Options{ThresholdUpdate: model.ThresholdJoint}},
	} {
		t.Run(c.name, func(t *testing.T) {
			t.Parallel()
			between := ri
			if c.name == "growth" {
				between += ", random_slopes: true"
			}
			if strings.Contains(c.name, "no random intercepts") {
				between = noRI
			}
			geweke(t, Scenario{Name: "geweke", Model: base(pair, between, c.within, c.means), Persons: 8, Times: 4}, c.opt)
		})
	}
}

func geweke(t *testing.T, sc Scenario, opt sampler.Options) {
	pr := SBCPriors()
	l, err := templateLayout(sc, pr)
	if err != nil {
		t.Fatal(err)
	}
	params := l.Params()
	np := len(params)
	rng := rand.New(rand.NewPCG(2004, 799))

	// Marginal-conditional: independent prior draws.
	const M = 40000
	mcSum, mcSq := make([]float64, 2*np), make([]float64, 2*np)
	buf := make([]float64, 0, np)
	g := func(dst, v []float64) {
		for p, x := range v {
			dst[p], dst[np+p] = x, x*x
		}
	}
	gv := make([]float64, 2*np)
	for range M {
		st := DrawPrior(l, pr, rng)
		buf = st.Extract(buf)
		g(gv, buf)
		for k, x := range gv {
			mcSum[k] += x
			mcSq[k] += x * x
		}
	}

	// Successive-conditional.
	const L, batches, burn = 400000, 40, 2000
	st := DrawPrior(l, pr, rng)
	blocks := sampler.BlocksFor(l, opt)
	y := make([]float64, len(st.Y))
	batchSum := make([][]float64, batches)
	for b := range batchSum {
		batchSum[b] = make([]float64, 2*np)
	}
	per := L / batches
	for it := 0; it < L+burn; it++ {
		redrawData(st, rng, y)
		if err := sampler.Sweep(st, blocks, rng); err != nil {
			t.Fatalf("sweep %d: %v", it, err)
		}
		if it < burn {
			continue
		}
		buf = st.Extract(buf)
		g(gv, buf)
		b := (it - burn) / per
		for k, x := range gv {
			batchSum[b][k] += x
		}
	}
	// The square of a random-intercept variance has no finite variance
	// under the inverse-Wishart prior used here (df - J - 3 = 0), so its
	// z statistic would mean nothing: those test functions are left out.
	var use []int
	for k := 0; k < 2*np; k++ {
		if k >= np && (params[k-np].Kind == "ri_variance" || params[k-np].Kind == "slope_variance") {
			continue
		}
		use = append(use, k)
	}
	alpha := 0.01 / float64(len(use))
	zCrit := -normalQuantile(alpha / 2)
	for _, k := range use {
		name := params[k%np].Name
		if k >= np {
			name += "^2"
		}
		mcMean := mcSum[k] / M
		mcVar := mcSq[k]/M - mcMean*mcMean
		var s, ss float64
		for b := range batchSum {
			m := batchSum[b][k] / float64(per)
			s += m
			ss += m * m
		}
		scMean := s / batches
		scSE := math.Sqrt((ss/batches - scMean*scMean) / (batches - 1))
		zv := (mcMean - scMean) / math.Sqrt(mcVar/M+scSE*scSE)
		t.Logf("%-34s prior %9.4f  successive %9.4f (se %.4f)  z %6.2f", name, mcMean, scMean, scSE, zv)
		if math.Abs(zv) > zCrit {
			t.Errorf("%s: marginal-conditional mean %.4f vs successive-conditional %.4f, |z| = %.2f > %.2f", name, mcMean, scMean, math.Abs(zv), zCrit)
		}
	}
}

func normalQuantile(p float64) float64 { return stdNormal.Quantile(p) }
