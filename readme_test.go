package lagstar_test

import (
	"context"
	"maps"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/lagstar/lagstar/fit"
	"github.com/lagstar/lagstar/model"
)

// TestREADMEModelFiles: the model files and the truth file shown in
// README.md are read by the parser as they stand, so the documented keys
// cannot drift from the ones lagstar accepts.
func TestREADMEModelFiles(t *testing.T) {
	raw, err := os.ReadFile("README.md")
	if err != nil {
		t.Fatal(err)
	}
	blocks := regexp.MustCompile("(?s)```yaml\n(.*?)```").FindAllStringSubmatch(string(raw), -1)
	var reference *model.Spec
	models, truths := 0, 0
	for _, b := range blocks {
		text := b[1]
		switch {
		case strings.HasPrefix(text, "data:") && strings.Contains(text, "\noutcomes:"):
			sp, err := model.ParseSpec("README.md", []byte(text))
			if err != nil {
				t.Errorf("README model file does not parse: %v\n%s", err, text)
				continue
			}
			if reference == nil && strings.Contains(text, "person_differences:") {
				reference = sp
			}
			models++
		case strings.HasPrefix(text, "thresholds:"):
			truths++
			if reference == nil {
				t.Fatal("the truth-file example comes before the reference model file")
			}
			path := filepath.Join(t.TempDir(), "truth.yaml")
			os.WriteFile(path, []byte(text), 0o644)
			if _, err := model.ReadTruth(path, reference); err != nil {
				t.Errorf("README truth file does not read against the reference model: %v", err)
			}
		}
	}
	if models == 0 || truths == 0 || reference == nil {
		t.Errorf("README: %d model files (reference found: %v), %d truth files; want the reference model and a truth file", models, reference != nil, truths)
	}
	for _, old := range []string{"\nbetween:", "\nwithin:", "  file: ", "  missing: ["} {
		if strings.Contains(string(raw), old) {
			t.Errorf("README still shows the old model-file key %q", strings.TrimSpace(old))
		}
	}
}

// TestREADMEMovingAverageExample runs the README's invented tension-diary
// example: it simulates the diary from the README's truth file, fits the
// README's ARMA(1,1) model and the same model without the moving average,
// and requires the ARMA fit's interval to cover the true coefficient and
// compare to prefer the ARMA model by more than two standard errors of
// the elpd difference.
func TestREADMEMovingAverageExample(t *testing.T) {
	if testing.Short() {
		t.Skip("fits skipped in -short mode")
	}
	modelText, truthText := readmeExample(t, "moving_average: true", "# truth for the invented tension diary")
	dir := t.TempDir()
	write := func(name, text string) string { return writeFile(t, dir, name, text) }
	arma := write("tension.yaml", modelText)
	ar := write("tension-ar.yaml", strings.Replace(modelText, "  moving_average: true\n", "", 1))
	truth := write("tension-truth.yaml", truthText)
	if _, err := fit.Simulate(fit.SimulateOptions{ModelPath: arma, TruthPath: truth, Persons: 200, Occasions: 14, Seed: 4,
		Out: filepath.Join(dir, "tension.csv")}); err != nil {
		t.Fatal(err)
	}
	runs := []string{filepath.Join(dir, "arma"), filepath.Join(dir, "ar")}
	for k, m := range []string{arma, ar} {
		out, err := fit.Fit(context.Background(), fit.Options{ModelPath: m, OutDir: runs[k], Chains: 2, Warmup: 500, Draws: 500,
			FixedLength: true, Seed: 4, SeedSet: true})
		if err != nil {
			t.Fatal(err)
		}
		if k == 0 {
			for _, p := range out.Summary.Parameters {
				if p.Name == "moving_average[tension]" {
					lo, hi := float64(p.Lower), float64(p.Upper)
					t.Logf("moving_average[tension]: mean %.3f, interval [%.3f, %.3f] (truth -0.45)", float64(p.Mean), lo, hi)
					if !(lo <= -0.45 && -0.45 <= hi) {
						t.Errorf("moving average interval [%.3f, %.3f] misses the truth -0.45", lo, hi)
					}
				}
			}
		}
	}
	requirePrefers(t, runs, "arma", "the ARMA(1,1) model")
}

// TestREADMEGrowthExample runs the README's invented wrist-pain panel: it
// simulates the panel from the README's truth file, fits the README's
// growth model and the same model without random slopes (whose means are
// then free over time), and requires the growth fit's intervals to cover
// the true mean slope and slope variance and compare to prefer the growth
// model by more than two standard errors of the elpd difference.
func TestREADMEGrowthExample(t *testing.T) {
	if testing.Short() {
		t.Skip("fits skipped in -short mode")
	}
	modelText, truthText := readmeExample(t, "random_slopes: true", "# truth for the invented apprentices")
	dir := t.TempDir()
	write := func(name, text string) string { return writeFile(t, dir, name, text) }
	growth := write("wrists.yaml", modelText)
	riText := strings.NewReplacer("  random_slopes: true\n", "", "  time_scores: occasion_values\n", "").Replace(modelText)
	ri := write("wrists-ri.yaml", riText)
	truth := write("wrists-truth.yaml", truthText)
	if _, err := fit.Simulate(fit.SimulateOptions{ModelPath: growth, TruthPath: truth, Persons: 900, Occasions: 6, Seed: 4,
		Out: filepath.Join(dir, "wrists.csv")}); err != nil {
		t.Fatal(err)
	}
	runs := []string{filepath.Join(dir, "growth"), filepath.Join(dir, "ri")}
	for k, m := range []string{growth, ri} {
		out, err := fit.Fit(context.Background(), fit.Options{ModelPath: m, OutDir: runs[k], Chains: 2, Warmup: 1000, Draws: 1500,
			FixedLength: true, Seed: 4, SeedSet: true})
		if err != nil {
			t.Fatal(err)
		}
		if k > 0 {
			continue
		}
		requireCovers(t, out, map[string]float64{"slope_mean[wrist_pain]": -0.15, "slope_variance[wrist_pain]": 0.12})
	}
	requirePrefers(t, runs, "growth", "the growth model")
}

// requireCovers requires the 95% intervals of the named parameters of a
// fit to cover their true values (and every name to be reported).
func requireCovers(t *testing.T, out *fit.Outcome, want map[string]float64) {
	t.Helper()
	want = maps.Clone(want)
	for _, p := range out.Summary.Parameters {
		if v, ok := want[p.Name]; ok {
			lo, hi := float64(p.Lower), float64(p.Upper)
			t.Logf("%s: mean %.3f, interval [%.3f, %.3f] (truth %g)", p.Name, float64(p.Mean), lo, hi, v)
			if !(lo <= v && v <= hi) {
				t.Errorf("%s: interval [%.3f, %.3f] misses the truth %g", p.Name, lo, hi, v)
			}
			delete(want, p.Name)
		}
	}
	if len(want) > 0 {
		t.Errorf("the fit reports no %v", want)
	}
}

// requirePrefers compares the runs and requires the first ranked to be
// the one whose name contains name, ahead by more than two standard
// errors of the elpd difference.
func requirePrefers(t *testing.T, runs []string, name, what string) {
	t.Helper()
	res, err := fit.Compare(fit.CompareOptions{RunDirs: runs, Draws: 100, GHKPoints: 200})
	if err != nil {
		t.Fatal(err)
	}
	for _, r := range res {
		t.Logf("%s: elpd_loo %.1f (se %.1f), difference %.1f (se %.1f)", r.Name, r.ELPDLoo, r.SELoo, r.DiffLoo, r.SEDiff)
	}
	if !strings.Contains(res[0].Name, name) || res[1].DiffLoo > -2*res[1].SEDiff {
		t.Errorf("compare does not prefer %s by more than 2 se: %+v", what, res)
	}
}

// readmeExample returns two of the README's yaml blocks: the model file
// that starts with "data:" and contains modelMark, and the truth file
// that starts with truthStart.
func readmeExample(t *testing.T, modelMark, truthStart string) (modelText, truthText string) {
	t.Helper()
	raw, err := os.ReadFile("README.md")
	if err != nil {
		t.Fatal(err)
	}
	for _, b := range regexp.MustCompile("(?s)```yaml\n(.*?)```").FindAllStringSubmatch(string(raw), -1) {
		switch {
		case strings.HasPrefix(b[1], "data:") && strings.Contains(b[1], modelMark):
			modelText = b[1]
		case strings.HasPrefix(b[1], truthStart):
			truthText = b[1]
		}
	}
	if modelText == "" || truthText == "" {
		t.Fatalf("README: no example model file with %q and truth file starting %q", modelMark, truthStart)
	}
	return modelText, truthText
}

// writeFile writes text to dir/name and returns the path.
func writeFile(t *testing.T, dir, name, text string) string {
	t.Helper()
	p := filepath.Join(dir, name)
	if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// TestREADMELatentLagExample runs the README's invented voice-strain
// panel: it simulates the panel from the README's truth file, fits the
// README's lagged-latent-response model and the same model with
// residual carry-over, and requires the lagged fit's intervals to cover
// the true carry-over and first-occasion loading and compare to prefer
// the lagged model by more than two standard errors of the elpd
// difference.
func TestREADMELatentLagExample(t *testing.T) {
	if testing.Short() {
		t.Skip("fits skipped in -short mode")
	}
	modelText, truthText := readmeExample(t, "lag_on: latent_response", "# truth for the invented call-centre")
	dir := t.TempDir()
	write := func(name, text string) string { return writeFile(t, dir, name, text) }
	lagged := write("voice.yaml", modelText)
	residual := write("voice-residual.yaml", strings.Replace(modelText, "  lag_on: latent_response\n", "", 1))
	truth := write("voice-truth.yaml", truthText)
	if _, err := fit.Simulate(fit.SimulateOptions{ModelPath: lagged, TruthPath: truth, Persons: 500, Occasions: 8, Seed: 4,
		Out: filepath.Join(dir, "voice.csv")}); err != nil {
		t.Fatal(err)
	}
	runs := []string{filepath.Join(dir, "lagged"), filepath.Join(dir, "residual")}
	for k, m := range []string{lagged, residual} {
		out, err := fit.Fit(context.Background(), fit.Options{ModelPath: m, OutDir: runs[k], Chains: 2, Warmup: 1000, Draws: 2000,
			FixedLength: true, Seed: 4, SeedSet: true})
		if err != nil {
			t.Fatal(err)
		}
		if k > 0 {
			continue
		}
		requireCovers(t, out, map[string]float64{"latent_autoregression[voice_strain]": 0.6, "first_loading[voice_strain<-ri:voice_strain]": 0.4})
	}
	requirePrefers(t, runs, "lagged", "the lagged model")
}
