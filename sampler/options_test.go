package sampler

import (
	"context"
	"fmt"
	"math"
	"slices"
	"strings"
	"testing"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/priors"
)

// TestEveryOptionCombination fits every combination of the model-file
// options briefly (outcome mixes x random intercepts x lags x residual
// correlation x paths over time x means over time x first occasion) and
// requires finite draws of the expected parameter kinds, or a refusal by
// Identify exactly where the rules say so.
func TestEveryOptionCombination(t *testing.T) {
	mixes := []struct {
		name  string
		types []model.OutcomeType
	}{
		{"binary", []model.OutcomeType{model.Binary}},
		{"ordinal", []model.OutcomeType{model.Ordinal}},
		{"continuous", []model.OutcomeType{model.Continuous}},
		{"binary+ordinal+continuous", []model.OutcomeType{model.Binary, model.Ordinal, model.Continuous}},
	}
	fitted, refused := 0, 0
	for mi, mix := range mixes {
		J := len(mix.types)
		tr, outs := mixTruth(mix.types)
		csv, err := Simulate(tr, 30, 5, newRand(uint64(mi)))
		if err != nil {
			t.Fatal(err)
		}
		for _, ri := range []bool{true, false} {
			for _, lags := range []string{"none", "own", "cross"} {
				for _, rc := range []bool{true, false} {
					for _, paths := range []string{"equal", "free"} {
						for _, means := range []string{"equal", "free"} {
							for _, first := range []string{"free", "stationary"} {
								yaml := fmt.Sprintf(`data: {csv: x.csv, person: person, occasion: occasion}
outcomes: [%s]
person_differences: {random_intercepts: %v}
dynamics: {lags: %s, residual_correlation: %v, over_time: %s, first_occasion: %s}
means: {over_time: %s}
`, outs, ri, lags, rc, paths, first, means)
								name := fmt.Sprintf("%s/ri=%v/lags=%s/rc=%v/paths=%s/means=%s/first=%s", mix.name, ri, lags, rc, paths, means, first)
								sp, err := model.ParseSpec("opt.yaml", []byte(yaml))
								if err != nil {
									t.Fatalf("%s: %v", name, err)
								}
								pan, err := model.ParsePanel(sp, "opt.csv", csv)
								if err != nil {
									t.Fatalf("%s: %v", name, err)
								}
								wantRefusal := (first == "stationary" && paths == "free") || (lags == "cross" && J < 2) || (rc && J < 2)
								if err := model.Identify(sp, pan); err != nil {
									if !wantRefusal {
										t.Errorf("%s: refused unexpectedly: %v", name, err)
									}
									refused++
									continue
								}
								if wantRefusal {
									t.Errorf("%s: accepted, want a refusal", name)
									continue
								}
								kinds, ok := fitBriefly(t, name, NewLayout(sp, pan, priors.Default()), Options{Chains: 1, Warmup: 15, Draws: 10, Seed: 1})
								if !ok {
									continue
								}
								if ri != (kinds["ri_variance"] == J) {
									t.Errorf("%s: %d ri_variance parameters", name, kinds["ri_variance"])
								}
								if (lags != "none") != (kinds["autoregression"] > 0) || (lags == "cross") != (kinds["crosslag"] > 0) {
									t.Errorf("%s: paths %v", name, kinds)
								}
								if rc && J > 1 && kinds["innovation_correlation"] == 0 {
									t.Errorf("%s: no innovation correlations", name)
								}
								fitted++
							}
						}
					}
				}
			}
		}
	}
	t.Logf("%d combinations fitted, %d refused", fitted, refused)
}

// TestUnansweredOccasionNoted: with means free over time, an occasion at
// which nobody answered an outcome gets no mean parameter (it would rest
// on the prior alone) and the layout says so.
func TestUnansweredOccasionNoted(t *testing.T) {
	csv := "person,occasion,a,b\n"
	for i := 1; i <= 6; i++ {
		for occ := 1; occ <= 4; occ++ {
			b := fmt.Sprint((i + occ) % 2)
			if occ == 3 {
				b = "NA"
			}
			csv += fmt.Sprintf("%d,%d,%d,%s\n", i, occ, (i*occ)%2, b)
		}
	}
	l := layoutFrom(t, "data: {csv: x.csv, person: person, occasion: occasion, missing_codes: [NA]}\noutcomes: [{name: a, type: binary}, {name: b, type: binary}]\nmeans: {over_time: free}\n", []byte(csv))
	for _, p := range l.Params() {
		if p.Name == "mean[b,t=3]" {
			t.Error("a mean was made for an occasion nobody answered")
		}
	}
	if note := strings.Join(l.Notes, "\n"); !strings.Contains(note, `outcome "b" was answered by nobody at occasion 3`) {
		t.Errorf("notes %q lack the unanswered occasion", note)
	}
}

// TestEveryLatentLagCombination does the same for dynamics.lag_on:
// latent_response (outcome mixes x random intercepts x own or cross lags x
// residual correlation x paths and intercepts over time; the first
// occasion is always free): finite draws of the term's kinds, or a
// refusal exactly where the rules say so.
func TestEveryLatentLagCombination(t *testing.T) {
	mixes := [][]model.OutcomeType{{model.Binary}, {model.Ordinal}, {model.Continuous}, {model.Binary, model.Ordinal, model.Continuous}}
	fitted, refused := 0, 0
	for mi, types := range mixes {
		J := len(types)
		tr, outs := mixTruth(types)
		tr.Lag, tr.Sigma1 = true, make([]float64, J*J)
		for j := 0; j < J; j++ {
			tr.Sigma1[j*J+j] = 1
		}
		cont := slices.Contains(types, model.Continuous)
		csv, err := Simulate(tr, 30, 5, newRand(uint64(mi)))
		if err != nil {
			t.Fatal(err)
		}
		for _, ri := range []bool{true, false} {
			for _, lags := range []string{"own", "cross"} {
				for _, rc := range []bool{true, false} {
					for _, paths := range []string{"equal", "free"} {
						for _, means := range []string{"equal", "free"} {
							yaml := fmt.Sprintf("data: {csv: x.csv, person: person, occasion: occasion}\noutcomes: [%s]\nperson_differences: {random_intercepts: %v}\ndynamics: {lags: %s, residual_correlation: %v, over_time: %s, lag_on: latent_response}\nmeans: {over_time: %s}\n", outs, ri, lags, rc, paths, means)
							name := fmt.Sprintf("%v/ri=%v/lags=%s/rc=%v/paths=%s/means=%s", types, ri, lags, rc, paths, means)
							wantRefusal := (lags == "cross" && J < 2) || (rc && J < 2) || (cont && paths == "free" && means == "equal")
							sp, err := model.ParseSpec("opt.yaml", []byte(yaml))
							if err == nil {
								var pan *model.Panel
								if pan, err = model.ParsePanel(sp, "opt.csv", csv); err != nil {
									t.Fatalf("%s: %v", name, err)
								}
								if err = model.Identify(sp, pan); err == nil {
									if wantRefusal {
										t.Errorf("%s: accepted, want a refusal", name)
										continue
									}
									kinds, ok := fitBriefly(t, name, NewLayout(sp, pan, priors.Default()), Options{Chains: 1, Warmup: 15, Draws: 10, Seed: 1, ThresholdUpdate: model.ThresholdJoint})
									if !ok {
										continue
									}
									if kinds["latent_autoregression"] == 0 || (lags == "cross") != (kinds["latent_crosslag"] > 0) || kinds["autoregression"] > 0 ||
										kinds["lag_intercept"] == 0 || ri != (kinds["first_loading"] > 0) || kinds["mean"] > 0 {
										t.Errorf("%s: kinds %v", name, kinds)
									}
									fitted++
									continue
								}
							}
							if !wantRefusal {
								t.Errorf("%s: refused unexpectedly: %v", name, err)
							}
							refused++
						}
					}
				}
			}
		}
	}
	t.Logf("%d combinations fitted, %d refused", fitted, refused)
}

// mixTruth returns a truth for outcomes of the given types (named y1,
// y2, ...; variances 1, intercept variances 0.5, autoregressions 0.3, 10%
// missing) and their model-file entries.
func mixTruth(types []model.OutcomeType) (Truth, string) {
	J := len(types)
	tr := Truth{Sigma: make([]float64, J*J), Psi: make([]float64, J*J), A: make([]float64, J*J), Missing: 0.1}
	outs := ""
	for j, ty := range types {
		tr.Names = append(tr.Names, fmt.Sprintf("y%d", j+1))
		tr.Types = append(tr.Types, ty)
		switch ty {
		case model.Binary:
			tr.Tau = append(tr.Tau, []float64{0.2})
		case model.Ordinal:
			tr.Tau = append(tr.Tau, []float64{-0.8, 0, 0.9})
		default:
			tr.Tau = append(tr.Tau, nil)
		}
		tr.Sigma[j*J+j], tr.Psi[j*J+j], tr.A[j*J+j] = 1, 0.5, 0.3
		outs += fmt.Sprintf("{name: y%d, type: %s}, ", j+1, ty)
	}
	return tr, outs
}

// fitBriefly runs a short fit of l and reports the kinds of its
// parameters, or false (with the error reported) when the fit fails or
// leaves a draw that is not finite.
func fitBriefly(t *testing.T, name string, l *Layout, opt Options) (map[string]int, bool) {
	t.Helper()
	res, err := Run(context.Background(), l, opt)
	if err != nil {
		t.Errorf("%s: %v", name, err)
		return nil, false
	}
	for _, v := range append(res.Draws[0], res.DerivedDraws[0]...) {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			t.Errorf("%s: non-finite draw", name)
			break
		}
	}
	kinds := map[string]int{}
	for _, p := range res.Params {
		kinds[p.Kind]++
	}
	return kinds, true
}
