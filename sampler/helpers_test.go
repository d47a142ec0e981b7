package sampler

import (
	"context"
	"math"
	"math/rand/v2"
	"os"
	"runtime"
	"slices"
	"strconv"
	"testing"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/priors"
)

// layoutFrom builds a layout from model-file text and CSV content.
func layoutFrom(t testing.TB, yamlText string, csv []byte) *Layout {
	t.Helper()
	sp, err := model.ParseSpec("test.yaml", []byte(yamlText))
	if err != nil {
		t.Fatalf("ParseSpec: %v", err)
	}
	pan, err := model.ParsePanel(sp, "test.csv", csv)
	if err != nil {
		t.Fatalf("ParsePanel: %v", err)
	}
	if err := model.Identify(sp, pan); err != nil {
		t.Fatalf("Identify: %v", err)
	}
	return NewLayout(sp, pan, priors.Default())
}

// summary is a small posterior summary for tests.
type summary struct {
	mean, lo, hi float64
}

func summarize(res *Result) map[string]summary {
	out := map[string]summary{}
	np := len(res.Params)
	for p, par := range res.Params {
		var xs []float64
		for c := range res.Draws {
			for d := 0; d < res.Kept[c]; d++ {
				xs = append(xs, res.Draws[c][d*np+p])
			}
		}
		slices.Sort(xs)
		m := 0.0
		for _, x := range xs {
			m += x
		}
		m /= float64(len(xs))
		q := func(p float64) float64 { return xs[int(math.Round(p*float64(len(xs)-1)))] }
		out[par.Name] = summary{m, q(0.025), q(0.975)}
	}
	return out
}

func runFit(t testing.TB, l *Layout, chains, warmup, draws int, seed uint64) *Result {
	t.Helper()
	res, err := Run(context.Background(), l, Options{Chains: chains, Warmup: warmup, Draws: draws, Seed: seed, ThresholdUpdate: model.ThresholdJoint})
	if err != nil {
		t.Fatalf("Run: %v", err)
	}
	return res
}

func newRand(seed uint64) *rand.Rand { return rand.New(rand.NewPCG(seed, seed+1)) }

func envInt(name string, def int) int {
	if v, err := strconv.Atoi(os.Getenv(name)); err == nil {
		return v
	}
	return def
}

// requireCoresAndResume fits l with one chain at GOMAXPROCS 8 and 1 and
// requires the same draws, then resumes from a mid-run checkpoint and
// requires the draws of the uninterrupted run; what names the model in
// messages.
func requireCoresAndResume(t *testing.T, l *Layout, what string) {
	t.Helper()
	opt := Options{Chains: 1, Warmup: 3, Draws: 4, Seed: 7, ThresholdUpdate: model.ThresholdJoint}
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	runtime.GOMAXPROCS(8)
	full, err := Run(context.Background(), l, opt)
	if err != nil {
		t.Fatal(err)
	}
	var saved [][]byte
	ck := opt
	ck.CheckpointEvery = 5
	ck.Checkpoint = func(_ int, b []byte) error {
		if saved == nil {
			saved = [][]byte{slices.Clone(b)}
		}
		return nil
	}
	runtime.GOMAXPROCS(1)
	one, err := Run(context.Background(), l, ck)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(full.Draws[0], one.Draws[0]) {
		t.Fatalf("%s draws at GOMAXPROCS 1 differ from GOMAXPROCS 8", what)
	}
	r, err := Resume(context.Background(), l, opt, saved)
	if err != nil {
		t.Fatal(err)
	}
	got := r.Result()
	if !slices.Equal(full.Draws[0], got.Draws[0]) || !slices.Equal(full.DerivedDraws[0], got.DerivedDraws[0]) {
		t.Fatalf("resumed %s draws differ from the uninterrupted run", what)
	}
}
