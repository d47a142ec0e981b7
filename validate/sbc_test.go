package validate

import (
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"testing"
	"time"
)

// tierEnabled reports whether the long validation tier was asked for.
func tierEnabled() bool { return os.Getenv("LAGSTAR_VALIDATE") != "" }

func outDir() string {
	if d := os.Getenv("LAGSTAR_VALIDATION_OUT"); d != "" {
		return d
	}
	return filepath.Join("..", "validation-out")
}

// TestSBCTier is the validation tier: simulation-based calibration (Talts
// et al. 2018) for every scenario of Scenarios, 200 replications each,
// 4000 warm-up sweeps, ranks among 49 draws thinned by 40 (long enough for
// the slowest direction, correlations between latent responses of two
// categorical outcomes), chi-square uniformity over 10 bins,
// Bonferroni over all tests at family-wise level 0.05. Run with
// LAGSTAR_VALIDATE=1 go test ./validate -run Tier -timeout 2h -v.
func TestSBCTier(t *testing.T) {
	if !tierEnabled() {
		t.Skip("validation tier: set LAGSTAR_VALIDATE=1")
	}
	cfg := Config{Reps: 200, Warmup: 4000, Kept: 49, Thin: 40, Bins: 10, Seed: 20261202, Workers: runtime.GOMAXPROCS(0)}
	scenarios := Scenarios()
	if only := os.Getenv("LAGSTAR_VALIDATE_ONLY"); only != "" {
		// Scenarios whose names contain the text (to rerun some of the
		// tier after a change to their blocks).
		scenarios = slices.DeleteFunc(scenarios, func(s Scenario) bool { return !strings.Contains(s.Name, only) })
	}
	runSBC(t, scenarios, cfg, outDir())
}

// TestSBCCompact is the default-run subset of the tier: the scenarios the
// sampler package's short calibration does not cover, with fewer
// replications.
func TestSBCCompact(t *testing.T) {
	if testing.Short() || tierEnabled() {
		t.Skip("compact calibration skipped in -short mode and when the full tier runs")
	}
	var pick []Scenario
	for _, s := range Scenarios() {
		switch s.Name {
		case "continuous", "paths free over time", "means free over time", "no random intercepts":
			pick = append(pick, s)
		}
	}
	cfg := Config{Reps: 80, Warmup: 600, Kept: 49, Thin: 12, Bins: 5, Seed: 7, Workers: runtime.GOMAXPROCS(0)}
	runSBC(t, pick, cfg, t.TempDir())
}

func runSBC(t *testing.T, scenarios []Scenario, cfg Config, dir string) {
	var results []*SBCResult
	for _, sc := range scenarios {
		start := time.Now()
		res, err := RunSBC(sc, cfg)
		if err != nil {
			t.Fatal(err)
		}
		t.Logf("%s: %d parameters in %.0f s", sc.Name, len(res.Names), time.Since(start).Seconds())
		results = append(results, res)
	}
	verdicts, cut := Judge(results, 0.05)
	if err := WriteSBC(dir, results, verdicts, cut); err != nil {
		t.Fatal(err)
	}
	var failed []string
	for _, v := range verdicts {
		t.Logf("%-32s %-44s p = %.4f", v.Scenario, v.Param, v.PValue)
		if !v.Pass {
			failed = append(failed, fmt.Sprintf("%s / %s (p = %.2g)", v.Scenario, v.Param, v.PValue))
		}
	}
	if len(failed) > 0 {
		t.Errorf("ranks not uniform (Bonferroni threshold %.2g) for:\n%s", cut, strings.Join(failed, "\n"))
	}
	t.Logf("outputs in %s", dir)
}
