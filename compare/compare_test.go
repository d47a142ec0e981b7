package compare

import (
	"context"
	"math/rand/v2"
	"testing"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/priors"
	"github.com/lagstar/lagstar/sampler"
)

// layoutFrom builds a layout from model-file text and CSV content.
func layoutFrom(t *testing.T, yaml string, csv []byte) *sampler.Layout {
	t.Helper()
	sp, err := model.ParseSpec("m.yaml", []byte(yaml))
	if err != nil {
		t.Fatal(err)
	}
	pan, err := model.ParsePanel(sp, "d.csv", csv)
	if err != nil {
		t.Fatal(err)
	}
	return sampler.NewLayout(sp, pan, priors.Default())
}

func fitLL(t *testing.T, yaml string, csv []byte, S, R int) ModelFit {
	t.Helper()
	l := layoutFrom(t, yaml, csv)
	sp := l.Spec
	res, err := sampler.Run(context.Background(), l, sampler.Options{Chains: 2, Warmup: 500, Draws: 500, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	ll, rel, err := LogLik(l, sampler.EvenlySpaced(res.Vectors(), S), R)
	if err != nil {
		t.Fatal(err)
	}
	return ModelFit{Name: string(sp.Within.Lags), LL: ll, GHKSE: rel}
}

// TestComparePrefersTrueCrossLag: on a two-outcome binary panel with a
// true cross-lag of 0.2, the cross-lag model beats the own-lags model by
// more than 2 standard errors of the elpd difference.
func TestComparePrefersTrueCrossLag(t *testing.T) {
	if testing.Short() {
		t.Skip("fits skipped in -short mode")
	}
	tr := sampler.Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Binary, model.Binary},
		Tau: [][]float64{{0.2}, {-0.1}}, Psi: []float64{0.8, 0.2, 0.2, 0.8},
		A: []float64{0.3, 0, 0.2, 0.3}, Sigma: []float64{1, 0.2, 0.2, 1}, Sigma1: []float64{1, 0.2, 0.2, 1}}
	csv, err := sampler.Simulate(tr, 1500, 5, rand.New(rand.NewPCG(5, 6)))
	if err != nil {
		t.Fatal(err)
	}
	base := "data: {csv: d.csv, person: person, occasion: occasion}\noutcomes: [{name: a, type: binary}, {name: b, type: binary}]\nmeans: {over_time: equal}\n"
	cross := fitLL(t, base+"dynamics: {lags: cross}\n", csv, 100, 200)
	own := fitLL(t, base+"dynamics: {lags: own}\n", csv, 100, 200)
	rs, err := Compare([]ModelFit{own, cross})
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range rs {
		t.Logf("%-6s elpd_loo %.1f (se %.1f) diff %.1f (se %.1f) p_loo %.1f waic %.1f max k %.2f ghk rel.se %.3f",
			r.Name, r.ELPDLoo, r.SELoo, r.DiffLoo, r.SEDiff, r.PLoo, r.ELPDWaic, float64(r.MaxK), r.GHKRelSE)
	}
	if rs[0].Name != "cross" {
		t.Fatalf("best model %s, want cross", rs[0].Name)
	}
	if d := -rs[1].DiffLoo; d < 2*rs[1].SEDiff {
		t.Errorf("elpd difference %.1f is not above 2 se = %.1f", d, 2*rs[1].SEDiff)
	}
}
