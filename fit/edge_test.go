package fit

import (
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"math/rand/v2"
	"path/filepath"
	"strings"
	"testing"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/sampler"
)

// Numerical edge cases: each data set below is legal but strains some
// block (latent draws far in a tail, a carry-over next to the stability
// boundary, persons with no within-person information, a person who never
// moves). Each must fit to the end with finite values everywhere in the
// outputs; the refused cases (an outcome that never varies, an empty
// category) are tested in model and cmd/lagstar.

// edgeFit fits model text m to CSV data d and fails on any output that is
// not finite. It returns the summary's parameters by name.
func edgeFit(t *testing.T, m string, d []byte) map[string]float64 {
	t.Helper()
	dir := t.TempDir()
	out, err := Fit(context.Background(), Options{FixedLength: true, ModelPath: "m.yaml", ModelRaw: []byte(m), DataRaw: d, OutDir: dir,
		Chains: 2, Warmup: 300, Draws: 200, Seed: 12, SeedSet: true})
	if err != nil {
		t.Fatal(err)
	}
	if out.Result.Incomplete {
		t.Fatal("run incomplete")
	}
	for _, f := range []string{"summary.json", "draws.csv", "run.json"} {
		b := readFile(t, filepath.Join(dir, f))
		for _, bad := range []string{"NaN", "Inf", "nan", "inf"} {
			if bytes.Contains(b, []byte(bad)) {
				t.Errorf("%s contains %q", f, bad)
			}
		}
	}
	var s struct {
		Parameters []struct {
			Name string
			Mean *float64
		}
	}
	if err := json.Unmarshal(readFile(t, filepath.Join(dir, "summary.json")), &s); err != nil {
		t.Fatal(err)
	}
	got := map[string]float64{}
	for _, p := range s.Parameters {
		if p.Mean == nil {
			t.Errorf("parameter %s has no posterior mean", p.Name)
			continue
		}
		got[p.Name] = *p.Mean
	}
	return got
}

func simulate(t *testing.T, tr sampler.Truth, n, T int, seed uint64) [][]string {
	t.Helper()
	raw, err := sampler.Simulate(tr, n, T, rand.New(rand.NewPCG(seed, 1)))
	if err != nil {
		t.Fatal(err)
	}
	recs, err := csv.NewReader(bytes.NewReader(raw)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	return recs
}

func toCSV(recs [][]string) []byte {
	var b bytes.Buffer
	w := csv.NewWriter(&b)
	w.WriteAll(recs)
	return b.Bytes()
}

const edgeOrdinal = `data: {csv: d.csv, person: person, occasion: occasion}
outcomes: [{name: y, type: ordinal, categories: 4, lowest: 0}]
dynamics: {lags: own, first_occasion: %s}
means: {over_time: equal}
`

func ordinalTruth(tau []float64, a, psi float64) sampler.Truth {
	return sampler.Truth{Names: []string{"y"}, Types: []model.OutcomeType{model.Ordinal}, Tau: [][]float64{tau},
		Psi: []float64{psi}, A: []float64{a}, Sigma: []float64{1}}
}

// TestEdgePersonInOneCategory: persons who gave the same answer at every
// occasion (top or bottom category), next to ordinary persons.
func TestEdgePersonInOneCategory(t *testing.T) {
	recs := simulate(t, ordinalTruth([]float64{-0.8, 0, 0.8}, 0.3, 0.8), 150, 8, 1)
	for _, r := range recs[1:] {
		switch r[0] {
		case "1", "2", "3":
			r[2] = "3"
		case "4", "5":
			r[2] = "0"
		}
	}
	edgeFit(t, strings.ReplaceAll(edgeOrdinal, "%s", "free"), toCSV(recs))
}

// TestEdgeCarryOverNearOne: a true carry-over of 0.97 (stationary variance
// about 17 times the innovation variance), fitted with a free and with a
// stationary first occasion; the estimate stays below 1 and near the truth.
func TestEdgeCarryOverNearOne(t *testing.T) {
	tr := ordinalTruth([]float64{-3, 0, 3}, 0.97, 0)
	tr.Psi = nil
	data := toCSV(simulate(t, tr, 120, 20, 2))
	for _, first := range []string{"free", "stationary"} {
		t.Run(first, func(t *testing.T) {
			m := strings.ReplaceAll(edgeOrdinal, "%s", first) + "person_differences: {random_intercepts: false}\n"
			got := edgeFit(t, m, data)
			a := got["autoregression[y]"]
			if !(a > 0.85 && a < 1) {
				t.Errorf("carry-over %.3f, want near 0.97 and below 1", a)
			}
		})
	}
}

// TestEdgeFarTailThresholds: a binary outcome answered yes in about 0.6%
// of cells (threshold 2.5) and an ordinal one whose outer categories are
// about 0.35% each (thresholds -2.7 and 2.7).
func TestEdgeFarTailThresholds(t *testing.T) {
	tr := sampler.Truth{Names: []string{"rare", "y"}, Types: []model.OutcomeType{model.Binary, model.Ordinal},
		Tau: [][]float64{{2.5}, {-2.7, 0, 2.7}}, Psi: []float64{0.3, 0, 0, 0.3}, A: []float64{0.2, 0, 0, 0.2},
		Sigma: []float64{1, 0, 0, 1}, Sigma1: []float64{1, 0, 0, 1}}
	recs := simulate(t, tr, 500, 8, 3)
	m := `data: {csv: d.csv, person: person, occasion: occasion}
outcomes: [{name: rare, type: binary}, {name: y, type: ordinal, categories: 4, lowest: 0}]
dynamics: {lags: own}
means: {over_time: equal}
`
	got := edgeFit(t, m, toCSV(recs))
	if tau := got["threshold[y,3]"] - got["threshold[y,1]"]; !(tau > 3.5 && tau < 8) {
		t.Errorf("outer thresholds %v apart, want about 5.4", tau)
	}
}

// TestEdgeOneOccasionPersons: a quarter of the persons answered once (some
// at the first occasion, some only at a later one), the rest six times.
func TestEdgeOneOccasionPersons(t *testing.T) {
	recs := simulate(t, ordinalTruth([]float64{-0.8, 0, 0.8}, 0.4, 0.6), 160, 6, 4)
	kept := recs[:1]
	for _, r := range recs[1:] {
		var id int
		for _, c := range r[0] {
			id = 10*id + int(c-'0')
		}
		switch {
		case id%8 == 0 && r[1] != "1":
			continue // only the first occasion
		case id%8 == 1 && r[1] != "4":
			continue // only occasion 4
		}
		kept = append(kept, r)
	}
	edgeFit(t, strings.ReplaceAll(edgeOrdinal, "%s", "free"), toCSV(kept))
}

// TestEdgeMergedEmptyCategory: an ordinal outcome declared with five
// categories of which one is never used fits once it is merged.
func TestEdgeMergedEmptyCategory(t *testing.T) {
	recs := simulate(t, ordinalTruth([]float64{-0.8, 0, 0.8}, 0.3, 0.5), 120, 6, 5)
	m := `data: {csv: d.csv, person: person, occasion: occasion}
outcomes: [{name: y, type: ordinal, categories: 5, lowest: 0, empty_categories: merge}]
dynamics: {lags: own}
means: {over_time: equal}
`
	got := edgeFit(t, m, toCSV(recs)) // category 4 never occurs
	if _, ok := got["threshold[y,4]"]; ok {
		t.Error("the empty category kept its threshold")
	}
	if _, ok := got["threshold[y,3]"]; !ok {
		t.Error("threshold[y,3] missing")
	}
}
