package fit

import (
	"context"
	"fmt"
	"strings"
	"testing"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/sampler"
)

// A diary whose first day few persons answered (as in a trial where 30 of
// 120 nurses filled in day 1): the means and thresholds of a categorical
// outcome are anchored at the best-observed occasion by default, the
// summary says so, and a run that does not converge names the
// parameters that rest on the sparse day instead of only asking for
// longer runs.

const sparseDiaryModel = `data: {csv: d.csv, person: person, occasion: occasion}
outcomes:
  - {name: rested, type: ordinal, categories: 4, lowest: 0}
  - {name: headache, type: binary}
dynamics: {lags: cross}
`

func sparseFirstDay(t *testing.T) []byte {
	t.Helper()
	tr := sampler.Truth{Names: []string{"rested", "headache"}, Types: []model.OutcomeType{model.Ordinal, model.Binary},
		Tau: [][]float64{{-0.8, 0, 0.8}, {0.6}}, Psi: []float64{0.6, -0.2, -0.2, 0.5},
		A: []float64{0.35, 0, -0.15, 0.25}, Sigma: []float64{1, -0.2, -0.2, 1}, Sigma1: []float64{1, -0.2, -0.2, 1}}
	recs := simulate(t, tr, 120, 10, 3)
	for i, r := range recs[1:] {
		if r[1] == "1" && i%40 >= 10 { // three in four persons skipped day 1
			r[2], r[3] = "", ""
		}
	}
	return toCSV(recs)
}

func TestSparseFirstOccasionAnchor(t *testing.T) {
	data := sparseFirstDay(t)
	fitWith := func(anchor string) *Outcome {
		m := sparseDiaryModel
		if anchor != "" {
			m += "means: {anchor: " + anchor + "}\n"
		}
		out, err := Fit(context.Background(), Options{FixedLength: true, ModelPath: "m.yaml", ModelRaw: []byte(m), DataRaw: data,
			Chains: 2, Warmup: 200, Draws: 100, Seed: 5, SeedSet: true})
		if err != nil {
			t.Fatal(err)
		}
		return out
	}

	auto := fitWith("")
	s := auto.Summary
	for _, name := range []string{"rested", "headache"} {
		if occ, ok := s.Model.MeanAnchor[name]; !ok || occ == 1 {
			t.Errorf("mean anchor of %s = %d (set %v), want an occasion other than the sparse first", name, occ, ok)
		}
	}
	warn := strings.Join(s.Warnings, "\n")
	if !strings.Contains(warn, `outcome "rested": its means are differences from occasion`) || !strings.Contains(warn, "answered the first occasion (1)") {
		t.Errorf("the summary should state the moved anchor; warnings:\n%s", warn)
	}
	for _, p := range auto.Result.Params {
		if p.Kind == "mean" && p.Outcome == "rested" && *p.Occasion == s.Model.MeanAnchor["rested"] {
			t.Errorf("%s is reported, but the anchor's mean is fixed at 0", p.Name)
		}
	}
	// 100 draws do not converge; the advice names the parameters of the
	// sparse day.
	if s.Converged {
		t.Fatal("a 100-draw run should not converge")
	}
	if !strings.Contains(warn, "likely cause:") || !strings.Contains(warn, "on occasion 1, which only") {
		t.Errorf("convergence advice should name the sparse occasion; warnings:\n%s", warn)
	}

	first := fitWith("first")
	if first.Summary.Model.MeanAnchor["rested"] != 1 {
		t.Errorf("means.anchor: first gave anchor %d, want 1", first.Summary.Model.MeanAnchor["rested"])
	}
	if w := strings.Join(first.Summary.Warnings, "\n"); !strings.Contains(w, "(means.anchor: first), which only") || !strings.Contains(w, "Set means.anchor: auto") {
		t.Errorf("an explicit sparse anchor should be warned about with the way out; warnings:\n%s", w)
	}
}

// TestAnchorAndSpacingRefusals: an anchor that is no occasion of the
// data, or one nobody answered, and paths free over time across an
// occasion nobody was surveyed in, are refused with the key named.
func TestAnchorAndSpacingRefusals(t *testing.T) {
	data := sparseFirstDay(t)
	// Yearly waves with nobody surveyed in 2020.
	gap := []byte("person,occasion,rested,headache\n")
	for p := range 30 {
		for _, year := range []int{2017, 2018, 2019, 2021, 2022} {
			gap = fmt.Appendf(gap, "p%d,%d,%d,%d\n", p, year, (p+year)%4, (p*year/7)%2)
		}
	}
	for _, c := range []struct {
		name, extra string
		data        []byte
		want        string
	}{
		{"anchor not an occasion", "means: {anchor: 99}\n", data, "means.anchor: occasion 99 is not an occasion of the data"},
		{"anchor not a number", "means: {anchor: middle}\n", data, "means.anchor: expected auto, first or an occasion value"},
		{"anchor with equal means", "means: {anchor: 2, over_time: equal}\n", data, "means.anchor: only used with means.over_time: free"},
		{"free paths over an unsurveyed year", "means: {over_time: equal}\n", gap, "nobody answered at occasion 2020"},
	} {
		t.Run(c.name, func(t *testing.T) {
			m := sparseDiaryModel + c.extra
			if c.name == "free paths over an unsurveyed year" {
				m = strings.Replace(m, "dynamics: {lags: cross}", "dynamics: {lags: cross, over_time: free}", 1)
			}
			_, err := Fit(context.Background(), Options{FixedLength: true, ModelPath: "m.yaml", ModelRaw: []byte(m), DataRaw: c.data, Chains: 1, Draws: 5, Warmup: 5})
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("err = %v, want %q", err, c.want)
			}
		})
	}
}

// TestREADMEModelOnSparseFirstDay: the README's reference model file, as
// printed there, fitted with its own sampler settings to an invented
// diary whose first day three in four nurses skipped, either converges or
// says why not: the moved anchor, and the parameters that rest on the
// sparse day.
func TestREADMEModelOnSparseFirstDay(t *testing.T) {
	if testing.Short() {
		t.Skip("fits the README model")
	}
	raw := string(readFile(t, "../README.md"))
	i := strings.Index(raw, "## Model file reference")
	b := strings.Index(raw[i:], "```yaml\n") + i + len("```yaml\n")
	e := strings.Index(raw[b:], "```") + b
	tr := sampler.Truth{Names: []string{"rested", "headache"}, Types: []model.OutcomeType{model.Ordinal, model.Binary},
		Tau: [][]float64{{-1.2, -0.3, 0.5, 1.4}, {0.9}}, Psi: []float64{0.6, -0.2, -0.2, 0.5},
		A: []float64{0.35, 0, -0.15, 0.25}, Sigma: []float64{1, -0.2, -0.2, 1}, Sigma1: []float64{1, -0.2, -0.2, 1},
		PersonCol: "nurse", OccasionCol: "day", Codes: [][]string{{"1", "2", "3", "4", "5"}, {"no", "yes"}}}
	recs := simulate(t, tr, 120, 14, 7)
	for k, r := range recs[1:] {
		if r[1] == "1" && k%56 >= 14 { // persons 2-4 of every four skip day 1
			r[2], r[3] = "NA", "NA"
		}
	}
	out, err := Fit(context.Background(), Options{FixedLength: true, ModelPath: "diary.yaml", ModelRaw: []byte(raw[b:e]), DataRaw: toCSV(recs)})
	if err != nil {
		t.Fatal(err)
	}
	s := out.Summary
	warn := strings.Join(s.Warnings, "\n")
	if !strings.Contains(warn, "answered the first occasion (1)") {
		t.Errorf("the moved anchor should be stated; warnings:\n%s", warn)
	}
	if !s.Converged && !strings.Contains(warn, "run longer") {
		t.Errorf("an unconverged fit should say what to do; warnings:\n%s", warn)
	}
	t.Logf("converged %v; unconverged %v", s.Converged, s.Unconverged)
	t.Logf("warnings:\n%s", warn)
}
