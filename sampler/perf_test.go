package sampler

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/lagstar/lagstar/diagnostics"
	"github.com/lagstar/lagstar/model"
)

// Benchmark problems of docs/performance.md (invented).
//
//	D: a diary, one 5-category item, 200 persons x 60 days, random
//	   intercept, carry-over 0.6.
//	P: a panel, two binary outcomes, 2000 persons x 6 waves, cross-lags and
//	   random intercepts.
//	L: a large panel, three ordinal outcomes, 100,000 persons x 10 waves.
type problem struct {
	name  string
	yaml  string
	tr    Truth
	n, t  int
	large bool
}

func problems() []problem {
	return []problem{
		{name: "D", n: 200, t: 60,
			yaml: `data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: y, type: ordinal, categories: 5, lowest: 0}]
dynamics: {lags: own, first_occasion: stationary}
means: {over_time: equal}
`,
			tr: Truth{Names: []string{"y"}, Types: []model.OutcomeType{model.Ordinal}, Tau: [][]float64{{-1.2, -0.4, 0.4, 1.2}},
				Psi: []float64{0.5}, A: []float64{0.6}, Sigma: []float64{1}, Missing: 0.05}},
		{name: "P", n: 2000, t: 6,
			yaml: `data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: a, type: binary}, {name: b, type: binary}]
dynamics: {lags: cross}
means: {over_time: free}
`,
			tr: Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Binary, model.Binary}, Tau: [][]float64{{0.3}, {-0.2}},
				Psi: []float64{0.8, 0.3, 0.3, 0.6}, A: []float64{0.35, 0.15, 0.1, 0.3}, Sigma: []float64{1, 0.3, 0.3, 1}, Sigma1: []float64{1, 0.3, 0.3, 1}, Missing: 0.05}},
		{name: "L", n: 100000, t: 10, large: true,
			yaml: `data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: a, type: ordinal, categories: 5, lowest: 0}, {name: b, type: ordinal, categories: 4, lowest: 0}, {name: c, type: ordinal, categories: 3, lowest: 0}]
dynamics: {lags: cross}
means: {over_time: free}
`,
			tr: Truth{Names: []string{"a", "b", "c"}, Types: []model.OutcomeType{model.Ordinal, model.Ordinal, model.Ordinal},
				Tau: [][]float64{{-1.2, -0.4, 0.4, 1.2}, {-0.8, 0, 0.8}, {-0.5, 0.5}},
				Psi: []float64{0.6, 0.2, 0.1, 0.2, 0.5, 0.15, 0.1, 0.15, 0.4}, A: []float64{0.4, 0.1, 0, 0.05, 0.3, 0.1, 0, 0.1, 0.35},
				Sigma: []float64{1, 0.2, 0.1, 0.2, 1, 0.2, 0.1, 0.2, 1}, Sigma1: []float64{1, 0.3, 0.2, 0.3, 1, 0.3, 0.2, 0.3, 1}, Missing: 0.05}},
	}
}

func (p problem) layout(tb testing.TB) *Layout {
	csv, err := Simulate(p.tr, p.n, p.t, newRand(1))
	if err != nil {
		tb.Fatal(err)
	}
	return layoutFrom(tb, p.yaml, csv)
}

func latentCount(st *State) int {
	n := 0
	for c, v := range st.Y {
		if st.L.Cat[c%st.L.J] || math.IsNaN(v) {
			n++
		}
	}
	return n
}

// BenchmarkBlocks times each Gibbs block of problems D and P once per
// iteration, reporting ns per latent draw, so a block's share of a sweep can
// be read off directly.
func BenchmarkBlocks(b *testing.B) {
	for _, p := range problems() {
		if p.large {
			continue
		}
		l := p.layout(b)
		rng := newRand(2)
		st := NewState(l, rng)
		blocks := Blocks(l, model.ThresholdJoint)
		for range 20 {
			Sweep(st, blocks, rng)
		}
		n := latentCount(st)
		for _, blk := range blocks {
			b.Run(fmt.Sprintf("%s/%s", p.name, blk.Name()), func(b *testing.B) {
				b.ReportAllocs()
				for b.Loop() {
					if err := UpdateBlock(st, blk, rng); err != nil {
						b.Fatal(err)
					}
				}
				b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(n), "ns/latent")
			})
		}
	}
}

// essPerSecond fits l with the given blocks and returns the smallest
// bulk-ESS over structural parameters (thresholds, paths, variances,
// correlations) per second of sampling, with the parameter that sets it.
func essPerSecond(tb testing.TB, l *Layout, update model.ThresholdUpdate, chains, warmup, draws int, seed uint64, tweak func([]Block)) (float64, string, float64) {
	res, err := runWith(l, update, chains, warmup, draws, seed, tweak)
	return essSummary(tb, res, err, chains, draws)
}

func essPerSecondOpt(tb testing.TB, l *Layout, path bool) (float64, string, float64) {
	res, err := runOpts(context.Background(), l, Options{Chains: 2, Warmup: 1000, Draws: 2000, Seed: 1, ThresholdUpdate: model.ThresholdJoint, PathMoves: path}, nil)
	return essSummary(tb, res, err, 2, 2000)
}

func essSummary(tb testing.TB, res *Result, err error, chains, draws int) (float64, string, float64) {
	if err != nil {
		tb.Fatal(err)
	}
	minESS, arg := math.Inf(1), ""
	for p, par := range res.Params {
		if par.Kind == "mean" {
			continue
		}
		if e := diagnostics.ESSBulk(res.ParamChains(p, draws)); e < minESS {
			minESS, arg = e, par.Name
		}
	}
	return minESS / res.Elapsed.Seconds(), arg, res.Elapsed.Seconds()
}

// TestPerfESS prints figure (b) of docs/performance.md: minimum bulk-ESS
// per second, default sampler against plain Albert-Chib data
// augmentation, on problems D and P. Run with LAGSTAR_PERF=1.
func TestPerfESS(t *testing.T) {
	if os.Getenv("LAGSTAR_PERF") == "" {
		t.Skip("set LAGSTAR_PERF=1")
	}
	for _, p := range problems() {
		if p.large {
			continue
		}
		l := p.layout(t)
		def, defArg, defSec := essPerSecond(t, l, model.ThresholdJoint, 2, 1000, 3000, 1, nil)
		ac, acArg, acSec := essPerSecond(t, l, model.ThresholdAlbertChib, 2, 1000, 3000, 1, nil)
		t.Logf("%s: default %.1f ESS/s (min at %s, %.1f s); plain Albert-Chib %.2f ESS/s (min at %s, %.1f s); ratio %.1f",
			p.name, def, defArg, defSec, ac, acArg, acSec, def/ac)
	}
}

// runWith is Run with an optional change to every chain's blocks.
func runWith(l *Layout, update model.ThresholdUpdate, chains, warmup, draws int, seed uint64, tweak func([]Block)) (*Result, error) {
	return runOpts(context.Background(), l, Options{Chains: chains, Warmup: warmup, Draws: draws, Seed: seed, ThresholdUpdate: update}, tweak)
}

// TestPerfLarge fits problem L (three ordinal outcomes, 100,000 persons x
// 10 waves) and reports wall time, sweeps per second and peak resident
// memory (VmHWM of /proc/self/status). Run with LAGSTAR_PERF=1; the chain
// settings come from LAGSTAR_PERF_CHAINS, _WARMUP and _DRAWS (defaults 2,
// 250, 250).
func TestPerfLarge(t *testing.T) {
	if os.Getenv("LAGSTAR_PERF") == "" {
		t.Skip("set LAGSTAR_PERF=1")
	}
	env := func(k string, d int) int {
		if v, err := strconv.Atoi(os.Getenv(k)); err == nil {
			return v
		}
		return d
	}
	chains, warmup, draws := env("LAGSTAR_PERF_CHAINS", 2), env("LAGSTAR_PERF_WARMUP", 250), env("LAGSTAR_PERF_DRAWS", 250)
	p := problems()[2]
	start := time.Now()
	l := p.layout(t)
	prep := time.Since(start)
	res, err := Run(context.Background(), l, Options{Chains: chains, Warmup: warmup, Draws: draws, Seed: 1, ThresholdUpdate: model.ThresholdJoint})
	if err != nil {
		t.Fatal(err)
	}
	sweeps := float64(chains * (warmup + draws))
	t.Logf("L: %d persons x %d waves x 3 outcomes (%d cells); simulate+load %.1f s; %d chains x %d sweeps in %.1f s (%.2f s per sweep per chain); peak RSS %s",
		l.N, l.T, len(l.Panel.Y), prep.Seconds(), chains, warmup+draws, res.Elapsed.Seconds(), res.Elapsed.Seconds()*float64(min(chains, runtime.GOMAXPROCS(0)))/sweeps, peakRSS())
	s := summarize(res)
	for _, name := range []string{"threshold[a,1]", "autoregression[a]", "crosslag[b->a]", "ri_variance[c]", "innovation_correlation[a,b]"} {
		t.Logf("  %-30s mean %.3f [%.3f, %.3f]", name, s[name].mean, s[name].lo, s[name].hi)
	}
}

// peakRSS returns the process's peak resident set size from
// /proc/self/status (Linux), or "unknown".
func peakRSS() string {
	raw, err := os.ReadFile("/proc/self/status")
	if err != nil {
		return "unknown"
	}
	for _, line := range strings.Split(string(raw), "\n") {
		if strings.HasPrefix(line, "VmHWM:") {
			return strings.TrimSpace(strings.TrimPrefix(line, "VmHWM:"))
		}
	}
	return "unknown"
}

// essPerSecondWithPath is essPerSecond with the latent path move added
// after the latent block.
func essPerSecondWithPath(tb testing.TB, l *Layout) (float64, string, float64) {
	return essPerSecondOpt(tb, l, true)
}

// skipBlock is a block that does nothing, put in place of one to measure
// what the block buys.
type skipBlock struct{}

func (skipBlock) Name() string                    { return "skipped" }
func (skipBlock) Update(*State, *rand.Rand) error { return nil }
func (skipBlock) Writes() Part                    { return 0 }

// TestPerfLevel measures what the level moves buy on problem P (two
// binary outcomes, means free over time), on the sparse-first-occasion
// panel of level_test.go and on a 120-person, 14-day diary fitted with
// the README's default model (means free): minimum bulk-ESS per second over the thresholds
// and occasion means, and over the other structural parameters, with and
// without the block, over four seeds. Run with LAGSTAR_PERF=1.
func TestPerfLevel(t *testing.T) {
	if os.Getenv("LAGSTAR_PERF") == "" {
		t.Skip("set LAGSTAR_PERF=1")
	}
	sparse := "data: {csv: x.csv, person: person, occasion: occasion}\noutcomes: [{name: a, type: ordinal, categories: 4, lowest: 0}, {name: b, type: binary}]\ndynamics: {lags: cross}\n"
	diary, err := Simulate(Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Ordinal, model.Binary}, Tau: [][]float64{{-1.2, -0.3, 0.5, 1.4}, {0.9}},
		Psi: []float64{0.6, -0.2, -0.2, 0.5}, A: []float64{0.35, 0, -0.15, 0.25}, Sigma: []float64{1, -0.2, -0.2, 1}, Sigma1: []float64{1, -0.2, -0.2, 1}, Missing: 0.05}, 120, 14, newRand(3))
	if err != nil {
		t.Fatal(err)
	}
	diaryModel := "data: {csv: x.csv, person: person, occasion: occasion}\noutcomes: [{name: a, type: ordinal, categories: 5, lowest: 0}, {name: b, type: binary}]\ndynamics: {lags: cross}\n"
	for _, c := range []struct {
		name string
		l    *Layout
	}{{"P", problems()[1].layout(t)}, {"sparse first occasion", layoutFrom(t, sparse, levelData(t))}, {"diary 120 x 14, README model", layoutFrom(t, diaryModel, diary)}} {
		for _, with := range []bool{true, false} {
			var loc, rest []float64
			for seed := uint64(1); seed <= 4; seed++ {
				tweak := func(bs []Block) {
					for k, b := range bs {
						if _, ok := b.(*LevelBlock); ok && !with {
							bs[k] = skipBlock{}
						}
					}
				}
				res, err := runWith(c.l, model.ThresholdJoint, 2, 1000, 3000, seed, tweak)
				if err != nil {
					t.Fatal(err)
				}
				minLoc, minRest := math.Inf(1), math.Inf(1)
				slowest := ""
				for p, par := range res.Params {
					e := diagnostics.ESSBulk(res.ParamChains(p, 3000)) / res.Elapsed.Seconds()
					if par.Kind == "mean" || par.Kind == "threshold" {
						minLoc = min(minLoc, e)
					} else if e < minRest {
						minRest, slowest = e, par.Name
					}
				}
				t.Logf("  %s, level moves %v, seed %d: slowest other parameter %s", c.name, with, seed, slowest)
				loc, rest = append(loc, minLoc), append(rest, minRest)
			}
			t.Logf("%s, level moves %v: min ESS/s thresholds+means %.1f (seeds %.1f), other parameters %.1f (seeds %.1f)",
				c.name, with, median(loc), loc, median(rest), rest)
		}
	}
}

func median(xs []float64) float64 {
	s := slices.Clone(xs)
	slices.Sort(s)
	return (s[(len(s)-1)/2] + s[len(s)/2]) / 2
}

// TestPerfInterweave measures the interweaving move of the random-intercept
// scales (InterweaveBlock): minimum bulk-ESS per second (means left out,
// as in TestPerfESS) and the slowest parameter, with and without it, on
// problems D and P and the two-binary panel of 1,200 persons x 5 waves,
// three seeds each. Run with LAGSTAR_PERF=1.
func TestPerfInterweave(t *testing.T) {
	if os.Getenv("LAGSTAR_PERF") == "" {
		t.Skip("set LAGSTAR_PERF=1")
	}
	ps := problems()[:2]
	ps = append(ps, problem{name: "B (1200 x 5, two binary)", n: 1200, t: 5, yaml: `data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [{name: a, type: binary}, {name: b, type: binary}]
dynamics: {lags: cross}
means: {over_time: free}
`, tr: Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Binary, model.Binary}, Tau: [][]float64{{0.4}, {0.7}},
		Psi: []float64{0.8, 0.28, 0.28, 0.6}, A: []float64{0.3, 0, 0.15, 0.25}, Sigma: []float64{1, 0.3, 0.3, 1}, Sigma1: []float64{1, 0.3, 0.3, 1}, Missing: 0.05}})
	for _, p := range ps {
		l := p.layout(t)
		for _, iw := range []bool{false, true} {
			var rates []float64
			args := ""
			for seed := uint64(1); seed <= 3; seed++ {
				var tweak func([]Block)
				if !iw {
					tweak = func(bs []Block) {
						for k, b := range bs {
							if _, ok := b.(*InterweaveBlock); ok {
								bs[k] = skipBlock{}
							}
						}
					}
				}
				res, err := runOpts(context.Background(), l, Options{Chains: 2, Warmup: 1000, Draws: 3000, Seed: seed, ThresholdUpdate: model.ThresholdJoint}, tweak)
				r, arg, _ := essSummary(t, res, err, 2, 3000)
				rates = append(rates, r)
				args += " " + arg
			}
			slices.Sort(rates)
			t.Logf("%s, interweave %v: min bulk-ESS/s median %.1f (%.1f..%.1f); slowest:%s", p.name, iw, rates[1], rates[0], rates[2], args)
		}
	}
}
