package sampler

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
	"time"

	"github.com/lagstar/lagstar/latentresp"
	"github.com/lagstar/lagstar/model"
)

// BenchmarkSweep times one full Gibbs sweep of problems D and P (and of D
// and P with twice the persons, for figure c of docs/performance.md) and
// reports ns per latent draw (categorical or missing cell) and the ratio
// to the floor: the same sweep's truncation intervals drawn in a tight loop,
// timed in the same run (figure a).
func BenchmarkSweep(b *testing.B) {
	for _, p := range problems() {
		if p.large {
			continue
		}
		for _, mult := range []int{1, 2} {
			q := p
			q.n *= mult
			b.Run(fmt.Sprintf("%s/persons=%d/occasions=%d", q.name, q.n, q.t), func(b *testing.B) {
				l := q.layout(b)
				rng := newRand(2)
				st := NewState(l, rng)
				blocks := Blocks(l, model.ThresholdJoint)
				for range 20 {
					Sweep(st, blocks, rng)
				}
				floor := floorNs(l, st, rng)
				latent := latentCount(st)
				b.ReportAllocs()
				for b.Loop() {
					if err := Sweep(st, blocks, rng); err != nil {
						b.Fatal(err)
					}
				}
				ns := float64(b.Elapsed().Nanoseconds()) / float64(b.N) / float64(latent)
				b.ReportMetric(ns, "ns/latent")
				b.ReportMetric(ns/floor, "x-floor")
			})
		}
	}
}

// floorNs returns the time per draw of TruncStdNormal on the intervals of
// one latent sweep of st, drawn in a tight loop (missing cells counted as
// plain normal draws).
func floorNs(l *Layout, st *State, rng *rand.Rand) float64 {
	var ab [][2]float64
	lb := NewLatentBlock(l)
	lb.record = func(a, c float64) { ab = append(ab, [2]float64{a, c}) }
	UpdateBlock(st, lb, rng)
	missing := latentCount(st) - len(ab)
	best := math.Inf(1)
	s := 0.0
	for range 7 { // the fastest of 7 timings, to shed scheduling noise
		start := time.Now()
		const rounds = 20
		for range rounds {
			for _, x := range ab {
				s += latentresp.TruncStdNormal(rng, x[0], x[1])
			}
			for range missing {
				s += rng.NormFloat64()
			}
		}
		best = math.Min(best, float64(time.Since(start).Nanoseconds())/rounds/float64(len(ab)+missing))
	}
	if s == 42 {
		fmt.Print("")
	}
	return best
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

// BenchmarkCheckpoint times one chain checkpoint (encode only) of problems
// D and P after warm-up with 1000 kept draws, and reports its size and its
// cost in sweeps: with checkpoints every 500 sweeps the overhead is
// sweeps-per-checkpoint / 500.
func BenchmarkCheckpoint(b *testing.B) {
	for _, p := range problems()[:2] {
		b.Run(p.name, func(b *testing.B) {
			l := p.layout(b)
			r := newRunner(l, Options{Chains: 1, Warmup: 20, Draws: 1000, Seed: 1}, nil)
			if err := r.run(context.Background()); err != nil {
				b.Fatal(err)
			}
			ch := r.chains[0]
			start := time.Now()
			const sweeps = 20
			for range sweeps {
				Sweep(ch.st, ch.blocks, ch.rng)
			}
			perSweep := time.Since(start) / sweeps
			var size int
			b.ResetTimer()
			for range b.N {
				data, err := r.checkpoint(0)
				if err != nil {
					b.Fatal(err)
				}
				size = len(data)
			}
			b.ReportMetric(float64(size)/1e6, "MB")
			b.ReportMetric(float64(b.Elapsed())/float64(b.N)/float64(perSweep), "sweeps")
		})
	}
}

// BenchmarkSweepMovingAverage times one full sweep of the same panels
// fitted as AR(1) and as ARMA(1,1) (docs/performance.md, "ARMA(1,1)"): an
// ordinal diary (300 persons x 14 occasions) and a two-binary panel (1,200
// x 5), both with random intercepts.
func BenchmarkSweepMovingAverage(b *testing.B) {
	cases := []struct {
		name, outcomes string
		tr             Truth
		n, t           int
	}{
		{"ordinal", "[{name: y, type: ordinal, categories: 5, lowest: 0}]",
			Truth{Names: []string{"y"}, Types: []model.OutcomeType{model.Ordinal}, Tau: [][]float64{{-1, -0.3, 0.4, 1.1}},
				Psi: []float64{0.5}, A: []float64{0.6}, MA: []float64{-0.4}, Sigma: []float64{1}, Sigma1: []float64{1}, Missing: 0.05}, 300, 14},
		{"binary pair", "[{name: a, type: binary}, {name: b, type: binary}]",
			Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Binary, model.Binary}, Tau: [][]float64{{0.3}, {-0.2}},
				Psi: []float64{0.6, 0.2, 0.2, 0.5}, A: []float64{0.4, 0.1, 0.1, 0.3}, MA: []float64{-0.3, -0.2},
				Sigma: []float64{1, 0.2, 0.2, 1}, Sigma1: []float64{1, 0.2, 0.2, 1}, Missing: 0.05}, 1200, 5},
	}
	for _, c := range cases {
		csv, err := Simulate(c.tr, c.n, c.t, newRand(3))
		if err != nil {
			b.Fatal(err)
		}
		lags := "own"
		if len(c.tr.Names) > 1 {
			lags = "cross"
		}
		for _, ma := range []bool{false, true} {
			b.Run(fmt.Sprintf("%s/moving_average=%v", c.name, ma), func(b *testing.B) {
				l := layoutFrom(b, fmt.Sprintf("data: {csv: x.csv, person: person, occasion: occasion}\noutcomes: %s\ndynamics: {lags: %s, moving_average: %v}\nmeans: {over_time: equal}\n", c.outcomes, lags, ma), csv)
				benchSweeps(b, l)
			})
		}
	}
}

// BenchmarkSweepGrowth times one sweep of a panel fitted with random
// intercepts only and with growth (random intercepts and slopes), both
// with carry-over (docs/performance.md).
func BenchmarkSweepGrowth(b *testing.B) {
	cases := []struct {
		name, outcomes, lags string
		tr                   Truth
		n, t                 int
	}{
		{"binary", "[{name: y, type: binary}]", "own",
			Truth{Names: []string{"y"}, Types: []model.OutcomeType{model.Binary}, Tau: [][]float64{{0.3}},
				GrowthPsi: []float64{0.6, -0.05, -0.05, 0.1}, GrowthMean: []float64{0, -0.15}, A: []float64{0.3}, Sigma: []float64{1}, Sigma1: []float64{1}, Missing: 0.05}, 900, 6},
		{"binary pair", "[{name: a, type: binary}, {name: b, type: binary}]", "cross",
			Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Binary, model.Binary}, Tau: [][]float64{{0.3}, {-0.2}},
				GrowthPsi: []float64{0.6, 0.2, 0, 0, 0.2, 0.5, 0, 0, 0, 0, 0.05, 0.01, 0, 0, 0.01, 0.05}, GrowthMean: []float64{0, 0, -0.1, 0.1},
				A: []float64{0.4, 0.1, 0.1, 0.3}, Sigma: []float64{1, 0.2, 0.2, 1}, Sigma1: []float64{1, 0.2, 0.2, 1}, Missing: 0.05}, 1200, 5},
	}
	for _, c := range cases {
		csv, err := Simulate(c.tr, c.n, c.t, newRand(3))
		if err != nil {
			b.Fatal(err)
		}
		for _, growth := range []bool{false, true} {
			b.Run(fmt.Sprintf("%s/growth=%v", c.name, growth), func(b *testing.B) {
				means := "means: {over_time: free}\n"
				if growth {
					means = ""
				}
				l := layoutFrom(b, fmt.Sprintf("data: {csv: x.csv, person: person, occasion: occasion}\noutcomes: %s\nperson_differences: {random_slopes: %v}\ndynamics: {lags: %s}\n%s", c.outcomes, growth, c.lags, means), csv)
				benchSweeps(b, l)
			})
		}
	}
}

// benchSweeps times sweeps of every block of l after 20 warm-up sweeps.
func benchSweeps(b *testing.B, l *Layout) {
	rng := newRand(2)
	st := NewState(l, rng)
	blocks := Blocks(l, model.ThresholdJoint)
	for range 20 {
		Sweep(st, blocks, rng)
	}
	b.ReportAllocs()
	for b.Loop() {
		if err := Sweep(st, blocks, rng); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkSweepLatentLag times a sweep of the lagged latent response
// against the residual carry-over model on the same panel (one binary
// outcome, and a binary pair with cross-lags), both with random
// intercepts: the cost of the dynamic-form blocks.
func BenchmarkSweepLatentLag(b *testing.B) {
	cases := []struct {
		name, outcomes, lags string
		tr                   Truth
		n, t                 int
	}{
		{"binary", "[{name: y, type: binary}]", "own",
			Truth{Names: []string{"y"}, Types: []model.OutcomeType{model.Binary}, Tau: [][]float64{{0.3}},
				Psi: []float64{0.5}, A: []float64{0.5}, Sigma: []float64{1}, Sigma1: []float64{1}, Lag: true, Loadings: []float64{1.2}, Missing: 0.05}, 900, 6},
		{"binary pair", "[{name: a, type: binary}, {name: b, type: binary}]", "cross",
			Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Binary, model.Binary}, Tau: [][]float64{{0.3}, {-0.2}},
				Psi: []float64{0.6, 0.2, 0.2, 0.5}, A: []float64{0.4, 0.1, 0.1, 0.3}, Sigma: []float64{1, 0.2, 0.2, 1}, Sigma1: []float64{1, 0.2, 0.2, 1},
				Lag: true, Loadings: []float64{1.3, 0, 0, 1.3}, Missing: 0.05}, 1200, 5},
	}
	for _, c := range cases {
		csv, err := Simulate(c.tr, c.n, c.t, newRand(3))
		if err != nil {
			b.Fatal(err)
		}
		for _, lag := range []bool{false, true} {
			b.Run(fmt.Sprintf("%s/latent=%v", c.name, lag), func(b *testing.B) {
				dyn := "dynamics: {lags: " + c.lags
				if lag {
					dyn += ", lag_on: latent_response"
				}
				l := layoutFrom(b, "data: {csv: x.csv, person: person, occasion: occasion}\noutcomes: "+c.outcomes+"\n"+dyn+"}\nmeans: {over_time: free}\n", csv)
				benchSweeps(b, l)
			})
		}
	}
}
