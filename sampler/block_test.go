package sampler

import (
	"fmt"
	"math"
	"slices"
	"testing"

	"github.com/lagstar/lagstar/model"
)

// parts returns a copy of each part of the state, keyed by Part.
func parts(s *State) map[Part][]float64 {
	flat := func(xs [][]float64) []float64 {
		var out []float64
		for _, x := range xs {
			out = append(out, x...)
		}
		return out
	}
	return map[Part][]float64{
		PartLatent: slices.Clone(s.Ystar), PartIntercepts: slices.Clone(s.B), PartThresholds: flat(s.Tau),
		PartMeans: append(slices.Clone(s.Mean), s.Nu...), PartPaths: slices.Clone(s.A),
		PartCovariances: append(flat(s.SD), flat(s.R)...), PartInterceptCov: slices.Clone(s.Psi), PartOwn: flat(s.own),
	}
}

// TestBlocksDeclareWrites runs every block of several models (mixed
// outcomes, free and equal paths and means, path moves on) and fails when
// a block changes a part of the state it does not declare in Writes: the
// cache dependency table (cacheInputs) would then leave a stale cache.
// It also checks that every declared cache a block keeps is current
// after it: WQuad against a direct pass.
func TestBlocksDeclareWrites(t *testing.T) {
	mixed := Truth{Names: []string{"a", "b", "c"}, Types: []model.OutcomeType{model.Binary, model.Ordinal, model.Continuous},
		Tau: [][]float64{{0.2}, {-0.7, 0.1, 0.9}, nil}, Psi: []float64{0.5, 0.1, 0, 0.1, 0.4, 0, 0, 0, 0.6},
		A: []float64{0.3, 0.1, 0, 0, 0.3, 0, 0, 0, 0.2}, Sigma: []float64{1, 0.2, 0, 0.2, 1, 0, 0, 0, 1}, Missing: 0.1}
	one := Truth{Names: []string{"y"}, Types: []model.OutcomeType{model.Ordinal}, Tau: [][]float64{{-1, 0, 1}},
		Psi: []float64{0.5}, A: []float64{0.4}, Sigma: []float64{1}, Missing: 0.05}
	binary := Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Binary, model.Binary}, Tau: [][]float64{{0.3}, {-0.2}},
		Psi: []float64{0.8, 0.3, 0.3, 0.6}, A: []float64{0.35, 0.15, 0.1, 0.3}, Sigma: []float64{1, 0.3, 0.3, 1}, Missing: 0.05}
	cases := []struct {
		tr    Truth
		yaml  string
		moves bool
	}{
		{mixed, "outcomes: [{name: a, type: binary}, {name: b, type: ordinal, categories: 4}, {name: c, type: continuous}]\ndynamics: {lags: cross, residual_correlation: true, over_time: free}\nmeans: {over_time: free}\n", false},
		{mixed, "outcomes: [{name: a, type: binary}, {name: b, type: ordinal, categories: 4}, {name: c, type: continuous}]\ndynamics: {lags: own, first_occasion: stationary}\n", false},
		{one, "outcomes: [{name: y, type: ordinal, categories: 4}]\ndynamics: {lags: own}\n", false},
		{binary, "outcomes: [{name: a, type: binary}, {name: b, type: binary}]\ndynamics: {lags: cross, residual_correlation: true}\nmeans: {over_time: free}\n", true},
		{mixed, "outcomes: [{name: a, type: binary}, {name: b, type: ordinal, categories: 4}, {name: c, type: continuous}]\ndynamics: {lags: cross, residual_correlation: true, lag_on: latent_response}\nmeans: {over_time: free}\n", false},
		{one, "outcomes: [{name: y, type: ordinal, categories: 4}]\ndynamics: {lags: own, lag_on: latent_response}\n", false},
	}
	for ci, c := range cases {
		csv, err := Simulate(c.tr, 40, 5, newRand(uint64(ci)))
		if err != nil {
			t.Fatal(err)
		}
		l := layoutFrom(t, "data: {csv: x.csv, person: person, occasion: occasion}\n"+c.yaml, csv)
		rng := newRand(uint64(100 + ci))
		st := NewState(l, rng)
		blocks := blocksFor(l, Options{ThresholdUpdate: model.ThresholdJoint, PathMoves: c.moves})
		for sweep := 0; sweep < 6; sweep++ {
			for _, b := range blocks {
				before := parts(st)
				if err := UpdateBlock(st, b, rng); err != nil {
					t.Fatalf("case %d, %s: %v", ci, b.Name(), err)
				}
				after := parts(st)
				for p, x := range before {
					if b.Writes()&p == 0 && !slices.Equal(x, after[p]) {
						t.Errorf("case %d: block %q changed part %s without declaring it", ci, b.Name(), partName(p))
					}
				}
				if st.WQuadOK {
					got := 0.0
					for _, v := range st.WQuad {
						got += v
					}
					if want := -2 * st.withinQuad(st.Ystar); math.Abs(got-want) > 1e-8*(1+math.Abs(want)) {
						t.Errorf("case %d: after %q WQuad says current but sums to %g, a direct pass gives %g", ci, b.Name(), got, want)
					}
				}
			}
		}
	}
}

func partName(p Part) string {
	names := map[Part]string{PartLatent: "latent", PartIntercepts: "intercepts", PartThresholds: "thresholds", PartMeans: "means",
		PartPaths: "paths", PartCovariances: "covariances", PartInterceptCov: "intercept covariance", PartOwn: "own values"}
	if n, ok := names[p]; ok {
		return n
	}
	return fmt.Sprint(uint16(p))
}

// TestExtractAllocatesNothing: taking a kept draw (parameters and derived
// quantities, every term's) allocates nothing, on a model with paths and
// means free over time and on a growth model with paths equal (the
// impulse responses).
func TestExtractAllocatesNothing(t *testing.T) {
	tr := Truth{Names: []string{"a", "b"}, Types: []model.OutcomeType{model.Ordinal, model.Binary}, Tau: [][]float64{{-0.5, 0.5}, {0.2}},
		Psi: []float64{0.5, 0.1, 0.1, 0.4}, A: []float64{0.3, 0.1, 0, 0.2}, Sigma: []float64{1, 0.2, 0.2, 1}, Missing: 0.05}
	csv, err := Simulate(tr, 30, 4, newRand(1))
	if err != nil {
		t.Fatal(err)
	}
	const head = "data: {csv: x.csv, person: person, occasion: occasion}\noutcomes: [{name: a, type: ordinal, categories: 3}, {name: b, type: binary}]\n"
	// Paths and means free; then growth with paths equal (impulse
	// responses, effects for the average occasion).
	for _, m := range []string{"dynamics: {lags: cross, over_time: free}\nmeans: {over_time: free}\n", "person_differences: {random_slopes: true}\ndynamics: {lags: cross}\n",
		"dynamics: {lags: cross, lag_on: latent_response}\nmeans: {over_time: free}\n"} {
		l := layoutFrom(t, head+m, csv)
		st := NewState(l, newRand(2))
		dw := NewDerivedWork(l)
		buf, dbuf := st.Extract(nil), st.ExtractDerived(nil, dw)
		if n := testing.AllocsPerRun(50, func() { buf = st.Extract(buf); dbuf = st.ExtractDerived(dbuf, dw) }); n != 0 {
			t.Errorf("%s: %.0f allocations per kept draw, want 0", m, n)
		}
	}
}
