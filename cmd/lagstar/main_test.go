package main

import (
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"sync/atomic"
	"testing"
)

const goodModel = `data:
  csv: data.csv
  person: id
  occasion: wave
outcomes:
  - name: mood
    type: ordinal
    categories: 3
    lowest: 1
  - name: pain
    type: binary
dynamics:
  lags: cross
means:
  over_time: equal
sampler:
  chains: 2
  warmup: 20
  draws: 20
  seed: 5
  until_converged: false
`

// growthModel is goodModel with random slopes (and so without a means
// section).
var growthModel = strings.Replace(strings.Replace(goodModel, "means:\n  over_time: equal\n", "", 1), "dynamics:", "person_differences:\n  random_slopes: true\ndynamics:", 1)

// threeOccasions keeps the rows of the first three waves of data.
func threeOccasions(data string) string {
	lines := strings.Split(strings.TrimSpace(data), "\n")
	out := []string{lines[0]}
	for _, ln := range lines[1:] {
		if f := strings.Split(ln, ","); f[1] <= "3" && len(f[1]) == 1 {
			out = append(out, ln)
		}
	}
	return strings.Join(out, "\n") + "\n"
}

func goodData() string {
	var b strings.Builder
	b.WriteString("id,wave,mood,pain\n")
	vals := []string{"1", "2", "3"}
	for p := 0; p < 12; p++ {
		for w := 1; w <= 4; w++ {
			b.WriteString(strings.Join([]string{"p" + string(rune('a'+p)), string(rune('0' + w)), vals[(p+w)%3], string(rune('0' + (p*w)%2))}, ","))
			b.WriteString("\n")
		}
	}
	return b.String()
}

// setup writes a model file and data file into a fresh folder.
func setup(t *testing.T, modelText, dataText string) (dir, modelPath string) {
	t.Helper()
	dir = t.TempDir()
	modelPath = filepath.Join(dir, "model.yaml")
	if err := os.WriteFile(modelPath, []byte(modelText), 0o644); err != nil {
		t.Fatal(err)
	}
	if dataText != "" {
		if err := os.WriteFile(filepath.Join(dir, "data.csv"), []byte(dataText), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	return dir, modelPath
}

func runCLI(args ...string) (int, string, string) {
	var out, errb bytes.Buffer
	code := run(context.Background(), args, &out, &errb)
	return code, out.String(), errb.String()
}

func TestFitWritesOutputs(t *testing.T) {
	dir, mp := setup(t, goodModel, goodData())
	out := filepath.Join(dir, "run")
	code, stdout, stderr := runCLI("fit", mp, "--out", out, "--quiet")
	if code != 0 {
		t.Fatalf("exit %d, stderr: %s", code, stderr)
	}
	for _, want := range []string{"Measurement", "Between persons", "Within persons", "Derived", "threshold[mood,1]", "not proof of causation"} {
		if !strings.Contains(stdout, want) {
			t.Errorf("table lacks %q", want)
		}
	}
	raw, err := os.ReadFile(filepath.Join(out, "summary.json"))
	if err != nil {
		t.Fatal(err)
	}
	var s struct {
		Program    string
		Seed       uint64
		Complete   bool
		Parameters []struct {
			Name, Kind string
			Rhat       *float64
		}
	}
	if err := json.Unmarshal(raw, &s); err != nil {
		t.Fatal(err)
	}
	if s.Program != "lagstar" || s.Seed != 5 || !s.Complete || len(s.Parameters) == 0 {
		t.Errorf("summary.json: program %q seed %d complete %v, %d parameters", s.Program, s.Seed, s.Complete, len(s.Parameters))
	}
	for _, f := range []string{"draws.csv", "run.json"} {
		if _, err := os.Stat(filepath.Join(out, f)); err != nil {
			t.Errorf("missing %s: %v", f, err)
		}
	}
	code, stdout, _ = runCLI("fit", mp, "--out", out, "--quiet", "--format", "json", "--draws", "10", "--overwrite")
	if code != 0 || !strings.HasPrefix(stdout, "{") {
		t.Errorf("--format json: exit %d, output starts %q", code, stdout[:min(20, len(stdout))])
	}
	// --warmup 0 means no warm-up, not the model file's 1000.
	warm := filepath.Join(t.TempDir(), "warm")
	if code, _, stderr := runCLI("fit", mp, "--out", warm, "--quiet", "--warmup", "0", "--draws", "10"); code != 0 {
		t.Fatalf("--warmup 0: exit %d: %s", code, stderr)
	}
	var rec struct{ Warmup int }
	if raw, err := os.ReadFile(filepath.Join(warm, "run.json")); err != nil || json.Unmarshal(raw, &rec) != nil || rec.Warmup != 0 {
		t.Errorf("--warmup 0: run.json warmup = %d (err %v), want 0", rec.Warmup, err)
	}
}

// TestBadInput checks that each bad input exits with status 2, names the
// file and the row or key, and leaves no summary.json.
func TestBadInput(t *testing.T) {
	data := goodData()
	cases := []struct {
		name       string
		model      string
		data       string
		args       []string
		wantInMsgs []string
	}{
		{"category outside range", goodModel, strings.Replace(data, "pa,1,2,", "pa,1,7,", 1), nil,
			[]string{"data.csv:2:", `outcome "mood"`, "category 7 outside 1..3"}},
		{"binary with three values", goodModel, strings.Replace(data, "pa,2,3,0", "pa,2,3,2", 1), nil,
			[]string{"data.csv", `outcome "pain" is binary`, "3 distinct values"}},
		{"duplicate person-occasion", goodModel, data + "pa,1,2,1\n", nil,
			[]string{"data.csv:50:", `person "pa" has occasion 1 twice`, "line 2"}},
		{"missing column", goodModel, strings.Replace(data, "id,wave,mood,pain", "id,wave,mood,pian", 1), nil,
			[]string{"data.csv:1:", `missing column "pain"`, `did you mean "pian"`}},
		{"non-integer occasion", goodModel, strings.Replace(data, "pb,2,", "pb,2.5,", 1), nil,
			[]string{"data.csv:7:", `occasion "2.5" is not a whole number`}},
		{"no rows", goodModel, "id,wave,mood,pain\n", nil,
			[]string{"data.csv", "no data rows"}},
		{"misspelled key", strings.Replace(goodModel, "lags: cross", "lag: cross", 1), data, nil,
			[]string{"model.yaml:13:", `unknown key in dynamics: "lag"`, `did you mean "lags"`}},
		{"unknown top-level key", goodModel + "priorz: {}\n", data, nil,
			[]string{"model.yaml:22:", `"priorz"`}},
		{"data file missing", strings.Replace(goodModel, "data.csv", "nothere.csv", 1), data, nil,
			[]string{"model.yaml", "nothere.csv does not exist"}},
		{"model file missing", "", data, []string{"fit", "nomodel.yaml"},
			[]string{"nomodel.yaml", "does not exist"}},
		{"unidentified: stationary with free paths", strings.Replace(goodModel, "lags: cross", "lags: cross\n  over_time: free\n  first_occasion: stationary", 1), data, nil,
			[]string{"model.yaml", "first_occasion: stationary needs dynamics.over_time: equal"}},
		{"ARMA with a stationary first occasion", strings.Replace(goodModel, "lags: cross", "lags: cross\n  moving_average: true\n  first_occasion: stationary", 1), data, nil,
			[]string{"model.yaml", "dynamics.moving_average: true needs dynamics.first_occasion: free"}},
		{"growth with a means section", strings.Replace(goodModel, "dynamics:", "person_differences:\n  random_slopes: true\ndynamics:", 1), data, nil,
			[]string{"model.yaml", "means: not used with person_differences.random_slopes: true"}},
		{"growth with a moving average", strings.Replace(growthModel, "lags: cross", "lags: cross\n  moving_average: true", 1), data, nil,
			[]string{"model.yaml", "random_slopes: true is not available with dynamics.moving_average: true"}},
		{"growth time scores not one per occasion", strings.Replace(growthModel, "random_slopes: true", "random_slopes: true\n  time_scores: [0, 1, 2]", 1), data, nil,
			[]string{"model.yaml", "person_differences.time_scores: 3 scores given for 4 occasions"}},
		{"lagged latent response with a moving average", strings.Replace(goodModel, "lags: cross", "lags: cross\n  lag_on: latent_response\n  moving_average: true", 1), data, nil,
			[]string{"model.yaml", "dynamics.lag_on: latent_response cannot be combined with dynamics.moving_average: true"}},
		{"lagged latent response on three occasions", strings.Replace(goodModel, "lags: cross", "lags: cross\n  lag_on: latent_response", 1), threeOccasions(data), nil,
			[]string{"model.yaml", "dynamics.lag_on: latent_response with random intercepts needs at least 4 occasions (the data have 3)"}},
		{"unidentified: cross-lags with one outcome", strings.Replace(goodModel, "  - name: pain\n    type: binary\n", "", 1), data, nil,
			[]string{"dynamics.lags: cross needs at least two outcomes"}},
		{"bad flag value", goodModel, data, []string{"--format", "xml"},
			[]string{"--format", "xml"}},
		{"bad level", goodModel, data, []string{"--level", "1.5"},
			[]string{"--level"}},
		{"unknown flag", goodModel, data, []string{"--chain", "3"},
			[]string{"unknown flag: --chain"}},
		{"outcome never varies", goodModel, strings.NewReplacer(",0\n", ",1\n").Replace(data), nil,
			[]string{"data.csv", `outcome "pain" takes the single value "1"`, "never varies"}},
		{"ordinal category never observed", strings.Replace(goodModel, "categories: 3", "categories: 4", 1), data, nil,
			[]string{"data.csv", `outcome "mood": category 4 never observed`, "empty_categories: merge"}},
		{"wide data: category out of range", strings.Replace(goodModel, "  occasion: wave\n", "  layout: wide\n", 1),
			"id,mood_1,mood_2,pain_1,pain_2\npa,1,2,0,1\npb,3,9,1,0\npc,2,3,0,0\n", nil,
			[]string{"data.csv:3:", `outcome "mood" (column "mood_2")`, "category 9 outside 1..3"}},
		{"bad checkpoint interval", goodModel, data, []string{"--checkpoint-every", "-5"},
			[]string{"--checkpoint-every"}},
		{"binary coded 1/2 without labels", goodModel, strings.NewReplacer(",0\n", ",2\n").Replace(data), nil,
			[]string{"data.csv", `outcome "pain" is binary but coded 1 and 2, not 0/1`, `labels: ["1", "2"]`, "upper category"}},
		// A given 0 is a value, not "the default".
		{"zero draws", goodModel, data, []string{"--draws", "0"},
			[]string{"--draws: expected a whole number >= 1, got 0"}},
		{"zero chains", goodModel, data, []string{"--chains", "0"},
			[]string{"--chains: expected a whole number from 1 to 64, got 0"}},
		{"zero max draws", goodModel, data, []string{"--until-converged", "--max-draws", "0"},
			[]string{"--max-draws: expected a whole number >= 1, got 0"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir, mp := setup(t, c.model, c.data)
			out := filepath.Join(dir, "run")
			args := append([]string{"fit", mp, "--out", out, "--quiet"}, c.args...)
			if c.args != nil && c.args[0] == "fit" {
				args = append(c.args, "--out", out)
				t.Chdir(dir)
			}
			code, _, stderr := runCLI(args...)
			if code != 2 {
				t.Fatalf("exit status %d, want 2; stderr: %s", code, stderr)
			}
			for _, w := range c.wantInMsgs {
				if !strings.Contains(stderr, w) {
					t.Errorf("message lacks %q:\n%s", w, stderr)
				}
			}
			if _, err := os.Stat(filepath.Join(out, "summary.json")); err == nil {
				t.Errorf("summary.json was written for bad input")
			}
		})
	}
}

const truthText = `thresholds: {mood: [-0.5, 0.6], pain: [0.3]}
random_intercepts:
  variances: {mood: 0.8, pain: 0.6}
  correlations: [{outcomes: [mood, pain], value: 0.3}]
paths:
  - {from: mood, to: mood, value: 0.4}
  - {from: pain, to: pain, value: 0.3}
  - {from: mood, to: pain, value: 0.2}
innovations:
  correlations: [{outcomes: [mood, pain], value: 0.25}]
missing: 0.05
`

// TestSimulateThenFit generates data with simulate and fits it with fit.
func TestSimulateThenFit(t *testing.T) {
	dir, mp := setup(t, goodModel, "")
	truth := filepath.Join(dir, "truth.yaml")
	if err := os.WriteFile(truth, []byte(truthText), 0o644); err != nil {
		t.Fatal(err)
	}
	code, _, stderr := runCLI("simulate", mp, "--truth", truth, "--persons", "50", "--occasions", "5", "--out", filepath.Join(dir, "data.csv"), "--seed", "4")
	if code != 0 {
		t.Fatalf("simulate: exit %d: %s", code, stderr)
	}
	raw, _ := os.ReadFile(filepath.Join(dir, "data.csv"))
	if !strings.HasPrefix(string(raw), "id,wave,mood,pain\n") || strings.Count(string(raw), "\n") != 251 {
		t.Fatalf("unexpected simulated file: %q...", string(raw[:min(60, len(raw))]))
	}
	// Missing cells are left empty, as the help says (the default first
	// missing code), and there are some at missing: 0.05.
	if strings.Contains(string(raw), "NA") || !strings.Contains(string(raw), ",,") && !strings.Contains(string(raw), ",\n") {
		t.Errorf("simulated missing cells should be empty:\n%s", raw[:min(300, len(raw))])
	}
	// --data fits another CSV with the same model file.
	sim := filepath.Join(dir, "sim.csv")
	os.Rename(filepath.Join(dir, "data.csv"), sim)
	if code, _, stderr := runCLI("fit", mp, "--data", sim, "--out", filepath.Join(dir, "simfit"), "--quiet", "--draws", "20"); code != 0 {
		t.Fatalf("fit --data: exit %d: %s", code, stderr)
	}
	if rec, _ := os.ReadFile(filepath.Join(dir, "simfit", "run.json")); !strings.Contains(string(rec), "sim.csv") {
		t.Error("run.json should name the --data file")
	}
	if code, _, stderr := runCLI("fit", mp, "--data", filepath.Join(dir, "nope.csv"), "--out", filepath.Join(dir, "nofit"), "--quiet"); code != 2 || !strings.Contains(stderr, "--data") {
		t.Errorf("fit --data at a missing file: exit %d, stderr %q", code, stderr)
	}
	os.Rename(sim, filepath.Join(dir, "data.csv"))
	code, _, stderr = runCLI("fit", mp, "--out", filepath.Join(dir, "run"), "--quiet")
	if code != 0 {
		t.Fatalf("fit of simulated data: exit %d: %s", code, stderr)
	}
	bad := strings.Replace(truthText, "pain: [0.3]", "pian: [0.3]", 1)
	if err := os.WriteFile(truth, []byte(bad), 0o644); err != nil {
		t.Fatal(err)
	}
	code, _, stderr = runCLI("simulate", mp, "--truth", truth, "--out", filepath.Join(dir, "x.csv"))
	if code != 2 || !strings.Contains(stderr, `"pian" is not an outcome`) {
		t.Errorf("bad truth file: exit %d, stderr %s", code, stderr)
	}
	// Moving averages in truth files: refused without the model key, out
	// of (-1, 1), or missing for an outcome.
	maModel := filepath.Join(dir, "ma.yaml")
	modelRaw, _ := os.ReadFile(mp)
	os.WriteFile(maModel, []byte(strings.Replace(string(modelRaw), "lags: cross", "lags: cross\n  moving_average: true", 1)), 0o644)
	for _, c := range []struct{ model, extra, want string }{
		{mp, "moving_averages: {mood: 0.2, pain: 0.1}\n", "the model file has no dynamics.moving_average: true"},
		{maModel, "moving_averages: {mood: 1.2, pain: 0.1}\n", "moving_averages.mood: expected a coefficient between -1 and 1"},
		{maModel, "moving_averages: {mood: 0.2}\n", `outcome "pain" needs its moving-average coefficient`},
	} {
		os.WriteFile(truth, []byte(truthText+c.extra), 0o644)
		code, _, stderr = runCLI("simulate", c.model, "--truth", truth, "--out", filepath.Join(dir, "x.csv"))
		if code != 2 || !strings.Contains(stderr, c.want) || !strings.Contains(stderr, "truth.yaml") {
			t.Errorf("truth file with %q: exit %d, stderr %s; want exit 2 naming truth.yaml and %q", c.extra, code, stderr, c.want)
		}
	}
	// Growth in truth files: refused without the model key, missing
	// slope variances, or occasion means; then a simulate run.
	gModel := filepath.Join(dir, "growth.yaml")
	os.WriteFile(gModel, []byte(strings.Replace(string(modelRaw), "dynamics:", "person_differences:\n  random_slopes: true\ndynamics:", 1)), 0o644)
	if raw, _ := os.ReadFile(gModel); strings.Contains(string(raw), "means:") {
		os.WriteFile(gModel, []byte(strings.Replace(string(raw), "means:\n  over_time: equal\n", "", 1)), 0o644)
	}
	slopes := "random_slopes: {variances: {mood: 0.05, pain: 0.04}, means: {mood: 0.1}, with_intercepts: [{intercept: mood, slope: pain, value: 0.2}]}\n"
	for _, c := range []struct{ model, extra, want string }{
		{mp, slopes, "random_slopes: the model file has no person_differences.random_slopes: true"},
		{gModel, "", "random_slopes: the model file has person_differences.random_slopes: true"},
		{gModel, "random_slopes: {variances: {mood: 0.05}}\n", `random_slopes.variances: outcome "pain" needs a slope variance`},
		{gModel, slopes + "means: {mood: [0, 0.1, 0.2, 0.3, 0.4]}\n", "means.mood: with random slopes the means follow the growth line"},
	} {
		os.WriteFile(truth, []byte(truthText+c.extra), 0o644)
		code, _, stderr = runCLI("simulate", c.model, "--truth", truth, "--occasions", "5", "--out", filepath.Join(dir, "x.csv"))
		if code != 2 || !strings.Contains(stderr, c.want) || !strings.Contains(stderr, "truth.yaml") {
			t.Errorf("growth truth file with %q: exit %d, stderr %s; want exit 2 naming truth.yaml and %q", c.extra, code, stderr, c.want)
		}
	}
	os.WriteFile(truth, []byte(truthText+slopes), 0o644)
	if code, _, stderr = runCLI("simulate", gModel, "--truth", truth, "--persons", "20", "--occasions", "5", "--out", filepath.Join(dir, "g.csv")); code != 0 {
		t.Errorf("simulate with growth: exit %d: %s", code, stderr)
	}
	os.WriteFile(truth, []byte(truthText+"moving_averages: {mood: -0.3, pain: 0.2}\n"), 0o644)
	if code, _, stderr = runCLI("simulate", maModel, "--truth", truth, "--persons", "20", "--occasions", "5", "--out", filepath.Join(dir, "ma.csv")); code != 0 {
		t.Errorf("simulate with moving averages: exit %d: %s", code, stderr)
	}
}

func TestReportTable(t *testing.T) {
	dir, mp := setup(t, goodModel, goodData())
	out := filepath.Join(dir, "run")
	if code, _, stderr := runCLI("fit", mp, "--out", out, "--quiet"); code != 0 {
		t.Fatalf("fit: %s", stderr)
	}
	code, stdout, stderr := runCLI("report", out, "--table", "md")
	if code != 0 || !strings.Contains(stdout, "| mood, threshold 1 |") {
		t.Errorf("report --table md: exit %d, stderr %s, output %q", code, stderr, stdout)
	}
	tex := filepath.Join(dir, "t.tex")
	if code, _, stderr := runCLI("report", out, "--table", "latex", "--out", tex); code != 0 {
		t.Errorf("report --table latex --out: exit %d: %s", code, stderr)
	} else if b, _ := os.ReadFile(tex); !strings.Contains(string(b), `\begin{tabular}`) {
		t.Error("latex file lacks a tabular")
	}
	for _, args := range [][]string{{"report", out, "--table", "pdf"}, {"report", filepath.Join(dir, "nope"), "--table", "md"}, {"report", filepath.Join(dir, "nope")}} {
		if code, _, _ := runCLI(args...); code != 2 {
			t.Errorf("%v: exit %d, want 2", args, code)
		}
	}
}

func TestCheckCommand(t *testing.T) {
	dir, mp := setup(t, goodModel, goodData())
	out := filepath.Join(dir, "run")
	if code, _, stderr := runCLI("fit", mp, "--out", out, "--quiet"); code != 0 {
		t.Fatalf("fit: %s", stderr)
	}
	code, stdout, stderr := runCLI("check", out, "--draws", "50")
	if code != 0 || !strings.Contains(stdout, "Posterior predictive checks") || !strings.Contains(stdout, "transition[mood:1->1]") {
		t.Fatalf("check: exit %d, stderr %s, output %q", code, stderr, stdout)
	}
	// Extreme p-values are read against how many chance alone gives.
	if !strings.Contains(stdout, "extreme: p outside (0.05, 0.95)") || !strings.Contains(stdout, "(one in ten would be") || strings.Contains(stdout, "not reproduced") {
		t.Errorf("check should word extreme p-values with their multiplicity:\n%s", stdout)
	}
	if _, err := os.Stat(filepath.Join(out, "check_transition.png")); err != nil {
		t.Errorf("check figure missing: %v", err)
	}
	raw, err := os.ReadFile(filepath.Join(out, "check.json"))
	if err != nil || !strings.Contains(string(raw), `"ppp"`) {
		t.Errorf("check.json missing or without p-values (err %v)", err)
	}
	// A tampered data copy is refused.
	if err := os.WriteFile(filepath.Join(out, "data.csv"), []byte("id,wave,mood,pain\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	if code, _, stderr := runCLI("check", out); code != 2 || !strings.Contains(stderr, "does not match the data of the run") {
		t.Errorf("tampered data: exit %d, stderr %s", code, stderr)
	}
	if code, _, _ := runCLI("check", filepath.Join(dir, "none")); code != 2 {
		t.Errorf("missing run folder: exit %d, want 2", code)
	}
}

func TestCompareCommand(t *testing.T) {
	dir, mp := setup(t, goodModel, goodData())
	own := filepath.Join(dir, "own")
	cross := filepath.Join(dir, "cross")
	if code, _, stderr := runCLI("fit", mp, "--out", cross, "--quiet"); code != 0 {
		t.Fatalf("fit: %s", stderr)
	}
	ownModel := filepath.Join(dir, "own.yaml")
	os.WriteFile(ownModel, []byte(strings.Replace(goodModel, "lags: cross", "lags: own", 1)), 0o644)
	if code, _, stderr := runCLI("fit", ownModel, "--out", own, "--quiet"); code != 0 {
		t.Fatalf("fit own: %s", stderr)
	}
	js := filepath.Join(dir, "cmp.json")
	code, stdout, stderr := runCLI("compare", own, cross, "--draws", "20", "--ghk-points", "50", "--out", js)
	if code != 0 || !strings.Contains(stdout, "elpd_loo") || !strings.Contains(stdout, "own") || !strings.Contains(stdout, "cross") {
		t.Fatalf("compare: exit %d, stderr %s, output %q", code, stderr, stdout)
	}
	if raw, err := os.ReadFile(js); err != nil || !strings.Contains(string(raw), "elpd_diff") {
		t.Errorf("comparison JSON missing (err %v)", err)
	}
	if code, _, _ := runCLI("compare", own); code != 2 {
		t.Errorf("one run folder: exit %d, want 2", code)
	}
}

// TestInterruptThenResume: a fit stopped by a signal (here a context
// cancelled before the first sweep) exits with status 1, says how to
// finish it and leaves a folder marked incomplete; fit --resume finishes it
// with the draws of an uninterrupted fit. Misuses of --resume exit 2.
func TestInterruptThenResume(t *testing.T) {
	dir, mp := setup(t, goodModel, goodData())
	want := filepath.Join(dir, "whole")
	if code, _, stderr := runCLI("fit", mp, "--out", want, "--quiet"); code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	out := filepath.Join(dir, "cut")
	// Interrupted once sampling has begun: the context reads as cancelled
	// from its second check on (the first is the fit's, after loading).
	ctx := &lateCancel{Context: context.Background(), after: 1}
	var so, se bytes.Buffer
	if code := run(ctx, []string{"fit", mp, "--out", out, "--quiet"}, &so, &se); code != 1 {
		t.Fatalf("interrupted fit: exit %d, want 1; stderr: %s", code, se.String())
	}
	for _, w := range []string{"interrupted", "lagstar fit --resume " + out} {
		if !strings.Contains(se.String(), w) {
			t.Errorf("stderr lacks %q:\n%s", w, se.String())
		}
	}
	if !strings.Contains(so.String(), "INCOMPLETE") {
		t.Errorf("table does not say the run is incomplete:\n%s", so.String())
	}
	for _, f := range []string{"summary.json", "run.json"} {
		raw, err := os.ReadFile(filepath.Join(out, f))
		if err != nil || !strings.Contains(string(raw), `"complete": false`) {
			t.Errorf("%s does not say complete: false (err %v)", f, err)
		}
		if strings.Contains(string(raw), "NaN") || strings.Contains(string(raw), "Inf") {
			t.Errorf("%s holds NaN or Inf:\n%s", f, raw)
		}
	}
	for _, c := range []struct {
		name string
		args []string
		want string
	}{
		{"fit over an unfinished run", []string{"fit", mp, "--out", out}, "--resume"},
		{"resume with a model file", []string{"fit", mp, "--resume", out}, "no model file"},
		{"resume with a setting", []string{"fit", "--resume", out, "--chains", "3"}, "--chains cannot be used with --resume"},
		{"resume a missing folder", []string{"fit", "--resume", filepath.Join(dir, "nothere")}, "not a run folder"},
		{"no model and no resume", []string{"fit"}, "needs a model file"},
	} {
		code, _, stderr := runCLI(c.args...)
		if code != 2 || !strings.Contains(stderr, c.want) {
			t.Errorf("%s: exit %d, stderr %q; want 2 and %q", c.name, code, stderr, c.want)
		}
	}
	if code, _, stderr := runCLI("fit", "--resume", out, "--quiet"); code != 0 {
		t.Fatalf("resume: exit %d: %s", code, stderr)
	}
	a, _ := os.ReadFile(filepath.Join(want, "draws.csv"))
	b, _ := os.ReadFile(filepath.Join(out, "draws.csv"))
	if len(a) == 0 || !bytes.Equal(a, b) {
		t.Error("draws.csv after resume differs from the uninterrupted fit")
	}
	if code, _, stderr := runCLI("fit", "--resume", out); code != 2 || !strings.Contains(stderr, "already complete") {
		t.Errorf("resuming a complete run: exit %d, %q", code, stderr)
	}
}

// TestDemoExamples: demo fits either bundled example and refuses others.
func TestDemoExamples(t *testing.T) {
	code, stdout, stderr := runCLI("demo", "--example", "wristpain", "--quiet", "--warmup", "20", "--draws", "20", "--max-draws", "20")
	if code != 0 || !strings.Contains(stdout, "wide layout") || !strings.Contains(stdout, "crosslag[workload->pain]") {
		t.Errorf("demo --example wristpain: exit %d, stderr %q, output:\n%s", code, stderr, stdout)
	}
	if code, _, stderr := runCLI("demo", "--example", "nope"); code != 2 || !strings.Contains(stderr, "--example") {
		t.Errorf("unknown example: exit %d, %q", code, stderr)
	}
}

// TestOutFolderSafety: a fit never writes into a folder of the user's, a
// finished run is replaced only with --overwrite, and then none of its
// files (figures included) outlive it, while files of the user's in the
// folder stay as they were.
func TestOutFolderSafety(t *testing.T) {
	dir, mp := setup(t, goodModel, goodData())
	snapshot := func(d string) map[string]string {
		got := map[string]string{}
		filepath.WalkDir(d, func(p string, e os.DirEntry, err error) error {
			if err == nil && !e.IsDir() {
				raw, _ := os.ReadFile(p)
				got[p] = string(raw)
			}
			return nil
		})
		return got
	}

	user := filepath.Join(dir, "thesis")
	os.MkdirAll(filepath.Join(user, "checkpoints"), 0o755)
	os.WriteFile(filepath.Join(user, "chapter1.tex"), []byte("my chapter"), 0o644)
	os.WriteFile(filepath.Join(user, "checkpoints", "notes.txt"), []byte("keep"), 0o644)
	os.WriteFile(filepath.Join(user, "report.html"), []byte("my page"), 0o644)
	before := snapshot(user)
	for _, extra := range [][]string{nil, {"--overwrite"}} {
		code, _, stderr := runCLI(append([]string{"fit", mp, "--out", user, "--quiet", "--draws", "10"}, extra...)...)
		if code != 2 || !strings.Contains(stderr, "not a lagstar run") || !strings.Contains(stderr, "chapter1.tex") {
			t.Errorf("fit into a folder of user files %v: exit %d, stderr %q; want 2 naming the files", extra, code, stderr)
		}
	}
	if after := snapshot(user); !reflect.DeepEqual(before, after) {
		t.Errorf("a folder of user files was modified:\nbefore %v\nafter  %v", before, after)
	}
	if _, err := os.Stat(filepath.Join(user, ".lagstar.lock")); err == nil {
		t.Error("a lock was left in a folder of user files")
	}

	file := filepath.Join(dir, "notes.txt")
	os.WriteFile(file, []byte("x"), 0o644)
	if code, _, stderr := runCLI("fit", mp, "--out", file, "--quiet"); code != 2 || !strings.Contains(stderr, "names a file") {
		t.Errorf("--out at a file: exit %d, stderr %q", code, stderr)
	}

	out := filepath.Join(dir, "run")
	if code, _, stderr := runCLI("fit", mp, "--out", out, "--quiet", "--draws", "10"); code != 0 {
		t.Fatalf("first fit: exit %d: %s", code, stderr)
	}
	stale := filepath.Join(out, "check_old.png")
	os.WriteFile(stale, []byte("png"), 0o644)
	mine := filepath.Join(out, "my-notes.md")
	os.WriteFile(mine, []byte("mine"), 0o644)
	first, _ := os.ReadFile(filepath.Join(out, "draws.csv"))
	code, _, stderr := runCLI("fit", mp, "--out", out, "--quiet", "--draws", "10", "--seed", "99")
	if code != 2 || !strings.Contains(stderr, "holds a finished run") || !strings.Contains(stderr, "--overwrite") {
		t.Errorf("second fit without --overwrite: exit %d, stderr %q; want 2 and a hint at --overwrite", code, stderr)
	}
	if again, _ := os.ReadFile(filepath.Join(out, "draws.csv")); string(again) != string(first) {
		t.Error("a refused fit changed the earlier run's draws")
	}
	if code, _, stderr := runCLI("fit", mp, "--out", out, "--quiet", "--draws", "10", "--seed", "99", "--overwrite"); code != 0 {
		t.Fatalf("--overwrite: exit %d: %s", code, stderr)
	}
	if _, err := os.Stat(stale); err == nil {
		t.Error("--overwrite left the old run's check_old.png")
	}
	if raw, err := os.ReadFile(mine); err != nil || string(raw) != "mine" {
		t.Errorf("--overwrite removed or changed a file of the user's (err %v)", err)
	}
	if again, _ := os.ReadFile(filepath.Join(out, "draws.csv")); string(again) == string(first) {
		t.Error("--overwrite did not write the new run")
	}
}

// TestUnconvergedNeverHides: a run that fails the convergence rule says so
// in every output made from it (manuscript tables in each format, the
// HTML report, check, compare) and on stderr; the LaTeX table is a whole
// table environment with a caption and a note naming N and occasions.
func TestUnconvergedNeverHides(t *testing.T) {
	dir, mp := setup(t, goodModel, goodData())
	out := filepath.Join(dir, "short")
	if code, _, stderr := runCLI("fit", mp, "--out", out, "--quiet", "--warmup", "10", "--draws", "10"); code != 0 {
		t.Fatalf("fit: %s", stderr)
	}
	for _, format := range []string{"md", "latex"} {
		code, stdout, stderr := runCLI("report", out, "--table", format)
		if code != 0 || !strings.Contains(stdout, "NOT CONVERGED") || !strings.Contains(stderr, "NOT CONVERGED") {
			t.Errorf("report --table %s: exit %d; output and stderr should say NOT CONVERGED:\n%s\n%s", format, code, stdout, stderr)
		}
		if !strings.Contains(stdout, "N = 12 persons, 4 occasions") {
			t.Errorf("report --table %s: the note should name N and the occasions:\n%s", format, stdout)
		}
		if format == "latex" {
			for _, want := range []string{`\begin{table}`, `\caption{`, `\textit{Note.}`, `\end{table}`} {
				if !strings.Contains(stdout, want) {
					t.Errorf("latex table lacks %s", want)
				}
			}
		}
	}
	_, stdout, _ := runCLI("report", out, "--table", "csv")
	if recs, err := csv.NewReader(strings.NewReader(stdout)).ReadAll(); err != nil || recs[0][len(recs[0])-1] != "converged" || !strings.Contains(stdout, ",false\n") {
		t.Errorf("csv table should carry a converged column with false rows (err %v):\n%s", err, stdout)
	}
	if code, _, stderr := runCLI("report", out); code != 0 || !strings.Contains(stderr, "NOT CONVERGED") {
		t.Errorf("report (HTML): exit %d, stderr %q", code, stderr)
	}
	if page, _ := os.ReadFile(filepath.Join(out, "report.html")); !strings.Contains(string(page), `class="alarm">NOT CONVERGED`) || strings.Contains(string(page), "run complete.") {
		t.Error("the HTML report should carry a NOT CONVERGED banner and never say just 'run complete'")
	}
	code, stdout, stderr := runCLI("check", out, "--draws", "10")
	if code != 0 || !strings.Contains(stdout, "NOT CONVERGED") || !strings.Contains(stderr, "NOT CONVERGED") {
		t.Errorf("check: exit %d; output and stderr should say NOT CONVERGED:\n%s\n%s", code, stdout, stderr)
	}
	code, stdout, stderr = runCLI("compare", out, out, "--draws", "10", "--ghk-points", "20")
	if code != 0 || !strings.Contains(stdout, "model short is NOT CONVERGED") || !strings.Contains(stderr, "NOT CONVERGED") {
		t.Errorf("compare: exit %d; output and stderr should say NOT CONVERGED:\n%s\n%s", code, stdout, stderr)
	}
}

// TestRunLengthFlags: a default fit samples until converged (here up to
// the --max-draws cap, in rounds sized from the ESS so far) and says where
// it stopped; --fixed-length keeps the first round; contradictory or bad
// run-length flags exit 2 naming the flag.
func TestRunLengthFlags(t *testing.T) {
	model := strings.Replace(goodModel, "  until_converged: false\n", "", 1)
	dir, mp := setup(t, model, goodData())
	code, stdout, stderr := runCLI("fit", mp, "--out", filepath.Join(dir, "a"), "--quiet", "--format", "json", "--max-draws", "45")
	if code != 0 {
		t.Fatalf("default fit: exit %d: %s", code, stderr)
	}
	var s struct {
		RunLength *struct {
			Rounds        int    `json:"rounds"`
			DrawsPerChain int    `json:"draws_per_chain"`
			StoppedBy     string `json:"stopped_by"`
			Converged     bool   `json:"converged"`
		} `json:"run_length"`
	}
	if err := json.Unmarshal([]byte(stdout), &s); err != nil {
		t.Fatal(err)
	}
	if rl := s.RunLength; rl == nil || rl.Converged || rl.StoppedBy != "draw cap" || rl.DrawsPerChain != 45 || rl.Rounds < 2 {
		t.Errorf("default fit of a short run: run_length %+v, want extended to the cap of 45 and stopped there", rl)
	}
	code, stdout, stderr = runCLI("fit", mp, "--out", filepath.Join(dir, "b"), "--quiet", "--format", "json", "--fixed-length")
	if code != 0 {
		t.Fatalf("--fixed-length: exit %d: %s", code, stderr)
	}
	s.RunLength = nil
	if err := json.Unmarshal([]byte(stdout), &s); err != nil || s.RunLength != nil {
		t.Errorf("--fixed-length: run_length %+v (%v), want none", s.RunLength, err)
	}
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"--fixed-length", "--until-converged"}, "contradict"},
		{[]string{"--time-limit", "-5m"}, "--time-limit"},
		{[]string{"--time-limit", "soon"}, "time-limit"},
	} {
		code, _, stderr := runCLI(append([]string{"fit", mp, "--out", filepath.Join(dir, "c"), "--quiet"}, c.args...)...)
		if code != 2 || !strings.Contains(stderr, c.want) {
			t.Errorf("fit %v: exit %d, stderr %q; want 2 naming %s", c.args, code, stderr, c.want)
		}
	}
}

// lateCancel is a context that reports itself cancelled from its
// (after+1)-th Err call on.
type lateCancel struct {
	context.Context
	n     atomic.Int32
	after int32
}

func (c *lateCancel) Err() error {
	if c.n.Add(1) > c.after {
		return context.Canceled
	}
	return nil
}
