package sampler

import (
	"fmt"
	"math"
	"testing"

	"github.com/lagstar/lagstar/latentresp"
	"github.com/lagstar/lagstar/model"
)

// benchLayout builds a two-outcome (ordinal K=5 + binary) cross-lagged
// random-intercept panel of n persons and t occasions.
func benchLayout(b *testing.B, n, t int) *Layout {
	tr := Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Ordinal, model.Binary},
		Tau: [][]float64{{-1.2, -0.4, 0.4, 1.2}, {0.5}}, Psi: []float64{0.6, 0.2, 0.2, 0.5},
		A: []float64{0.4, 0.1, 0.1, 0.3}, Sigma: []float64{1, 0.2, 0.2, 1}, Missing: 0.05}
	csv, err := Simulate(tr, n, t, newRand(1))
	if err != nil {
		b.Fatal(err)
	}
	return layoutFrom(b, `
data: {file: x.csv, person: person, occasion: occasion}
outcomes: [{name: a, type: ordinal, categories: 5, lowest: 0}, {name: b, type: binary}]
within: {lags: cross, first_occasion: stationary}
means: {over_time: equal}
`, csv)
}

// BenchmarkSweep times one full Gibbs sweep and reports ns per latent draw
// (categorical or missing cell), with the floor of drawing the same number
// of two-sided truncated normals in a tight loop alongside.
func BenchmarkSweep(b *testing.B) {
	for _, size := range []struct{ n, t int }{{200, 10}, {120, 42}, {1000, 10}} {
		b.Run(fmt.Sprintf("persons=%d/occasions=%d", size.n, size.t), func(b *testing.B) {
			l := benchLayout(b, size.n, size.t)
			rng := newRand(2)
			st := NewState(l, rng)
			blocks := Blocks(l, model.ThresholdJoint)
			latent := 0
			for c, v := range st.Y {
				if l.Cat[c%l.J] || math.IsNaN(v) {
					latent++
				}
			}
			b.ReportAllocs()
			for b.Loop() {
				if err := Sweep(st, blocks, rng); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(latent), "ns/latent")
		})
	}
}

// BenchmarkTruncNormalFloor draws two-sided truncated normals in a tight
// loop: the cost floor of a sweep's latent block.
func BenchmarkTruncNormalFloor(b *testing.B) {
	rng := newRand(3)
	s := 0.0
	for b.Loop() {
		s += latentresp.TruncStdNormal(rng, -0.4, 0.4)
	}
	_ = s
}
