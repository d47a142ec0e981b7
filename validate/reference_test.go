package validate

import (
	"context"
	"encoding/json"
	"math"
	"os"
	"testing"

	"github.com/lagstar/lagstar/fit"
	"github.com/lagstar/lagstar/report"
)

// reference holds the ML estimates of testdata/ri_ar1_nocov.json converted
// to lagstar's parameterisation (block innovation_variance_1_stationary_start).
func reference(t *testing.T, name string) map[string]float64 {
	t.Helper()
	raw, err := os.ReadFile("testdata/ri_ar1_nocov.json")
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Fits map[string]struct {
			Converted map[string]float64 `json:"innovation_variance_1_stationary_start"`
		} `json:"fits"`
	}
	if err := json.Unmarshal(raw, &ref); err != nil {
		t.Fatal(err)
	}
	return ref.Fits[name].Converted
}

// TestOutsideReferences fits the random-intercept model with stationary
// AR(1) latent residuals and equal means to the Ohio wheeze panel (Ware et
// al. 1984; Fitzmaurice & Laird 1993) and the koch ordinal panel (Debian
// r-cran-geepack), and compares with the exact-likelihood ML estimates of
// testdata/ri_ar1_nocov.json: the 95% interval must cover each value; the
// posterior median must lie within 0.5 posterior sd of it for thresholds
// and within 1 sd for the random-intercept variance and the autoregression.
// The binary panel mixes slowly (the random-intercept variance and the
// autoregression trade off: bulk-ESS about 1 per 60 sweeps even with the
// collapsed move), so the chains are long.
func TestOutsideReferences(t *testing.T) {
	if testing.Short() {
		t.Skip("reference fits skipped in -short mode")
	}
	cases := []struct {
		name, model string
		names       map[string]string // reference key -> parameter name
	}{
		{"ohio", `data: {csv: ohio.csv, person: id, occasion: occasion}
outcomes: [{name: resp, type: binary}]
person_differences: {random_intercepts: true}
dynamics: {lags: own, first_occasion: stationary}
means: {over_time: equal}
`, map[string]string{"threshold_1": "threshold[resp,1]", "ri_variance": "ri_variance[resp]", "autoregression": "autoregression[resp]"}},
		{"koch", `data: {csv: koch.csv, person: id, occasion: occasion}
outcomes: [{name: y, type: ordinal, categories: 3, lowest: 1}]
person_differences: {random_intercepts: true}
dynamics: {lags: own, first_occasion: stationary}
means: {over_time: equal}
`, map[string]string{"threshold_1": "threshold[y,1]", "threshold_2": "threshold[y,2]", "ri_variance": "ri_variance[y]", "autoregression": "autoregression[y]"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			data, err := os.ReadFile("testdata/" + c.name + ".csv")
			if err != nil {
				t.Fatal(err)
			}
			out, err := fit.Fit(context.Background(), fit.Options{FixedLength: true, ModelPath: "testdata/" + c.name + ".yaml", ModelRaw: []byte(c.model), DataRaw: data,
				Chains: 4, Warmup: 1500, Draws: 20000, Seed: 2026, SeedSet: true})
			if err != nil {
				t.Fatal(err)
			}
			ref := reference(t, c.name)
			byName := map[string]report.Entry{}
			for _, e := range out.Summary.Parameters {
				byName[e.Name] = e
			}
			for key, pname := range c.names {
				want := ref[key]
				e, ok := byName[pname]
				if !ok {
					t.Fatalf("no parameter %s", pname)
				}
				med, sd := float64(e.Median), float64(e.SD)
				tol := 1.0
				if e.Kind == "threshold" {
					tol = 0.5
				}
				t.Logf("%-22s ML %.4f  median %.4f  sd %.4f  95%% [%.4f, %.4f]  R-hat %.3f  ESS %.0f  |median-ML|/sd %.2f",
					pname, want, med, sd, float64(e.Lower), float64(e.Upper), float64(e.Rhat), float64(e.ESSBulk), math.Abs(med-want)/sd)
				if want < float64(e.Lower) || want > float64(e.Upper) {
					t.Errorf("%s: 95%% interval [%.4f, %.4f] misses the ML value %.4f", pname, float64(e.Lower), float64(e.Upper), want)
				}
				if math.Abs(med-want) > tol*sd {
					t.Errorf("%s: median %.4f is %.2f posterior sd from the ML value %.4f, want within %.1f", pname, med, math.Abs(med-want)/sd, want, tol)
				}
				// The comparison means something only for a converged run.
				if float64(e.Rhat) > 1.02 || float64(e.ESSBulk) < 200 {
					t.Errorf("%s: R-hat %.3f, bulk-ESS %.0f: not converged enough to compare", pname, float64(e.Rhat), float64(e.ESSBulk))
				}
			}
		})
	}
}
