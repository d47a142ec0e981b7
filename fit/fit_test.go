package fit

import (
	"bytes"
	"context"
	"encoding/csv"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"

	"github.com/lagstar/lagstar/examples"
	"github.com/lagstar/lagstar/report"
	"github.com/lagstar/lagstar/runfolder"
)

// TestSameSeedSameDrawsAnyGOMAXPROCS runs the bundled example three times with
// one seed, at GOMAXPROCS 1, 2 and 8, and requires byte-identical draws.csv.
func TestSameSeedSameDrawsAnyGOMAXPROCS(t *testing.T) {
	m, d := examples.SleepDiary()
	var outs [][]byte
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	for _, procs := range []int{1, 2, 8} {
		runtime.GOMAXPROCS(procs)
		dir := t.TempDir()
		_, err := Fit(context.Background(), Options{FixedLength: true, ModelPath: "sleepdiary/model.yaml", ModelRaw: m, DataRaw: d,
			OutDir: dir, Chains: 3, Warmup: 30, Draws: 40, Seed: 99, SeedSet: true})
		if err != nil {
			t.Fatal(err)
		}
		b, err := os.ReadFile(filepath.Join(dir, "draws.csv"))
		if err != nil {
			t.Fatal(err)
		}
		outs = append(outs, b)
	}
	for k := 1; k < len(outs); k++ {
		if !bytes.Equal(outs[0], outs[k]) {
			t.Fatalf("draws.csv differs between GOMAXPROCS 1 and run %d with the same seed", k+1)
		}
	}
	if len(outs[0]) < 1000 {
		t.Fatalf("draws.csv suspiciously short: %d bytes", len(outs[0]))
	}
}

// TestDifferentSeedsDiffer guards the determinism test against a sampler
// that ignores its seed.
func TestDifferentSeedsDiffer(t *testing.T) {
	m, d := examples.SleepDiary()
	var first []float64
	for _, seed := range []uint64{1, 2} {
		out, err := Fit(context.Background(), Options{FixedLength: true, ModelPath: "m.yaml", ModelRaw: m, DataRaw: d, Chains: 1, Warmup: 5, Draws: 5, Seed: seed, SeedSet: true})
		if err != nil {
			t.Fatal(err)
		}
		if first == nil {
			first = out.Result.Draws[0]
			continue
		}
		if slices.Equal(first, out.Result.Draws[0]) {
			t.Fatal("seeds 1 and 2 gave the same draws")
		}
	}
}

// TestCancelledRunIsIncomplete: a cancelled context stops the chains; the
// run is written, marked incomplete in summary.json and run.json, and warns.
func TestCancelledRunIsIncomplete(t *testing.T) {
	m, d := examples.SleepDiary()
	ctx, cancel := context.WithCancel(context.Background())
	var once sync.Once
	dir := t.TempDir()
	out, err := Fit(ctx, Options{FixedLength: true, ModelPath: "m.yaml", ModelRaw: m, DataRaw: d, OutDir: dir, Chains: 2, Warmup: 10, Draws: 100000, Seed: 1, SeedSet: true,
		Progress: func(chain, chains, done, total int) {
			if done > 40 {
				once.Do(cancel)
			}
		}})
	if err != nil {
		t.Fatal(err)
	}
	if out.Summary.Complete || out.Record.Complete {
		t.Error("cancelled run marked complete")
	}
	if !strings.Contains(strings.Join(out.Summary.Warnings, " "), "interrupted") {
		t.Errorf("warnings %q do not say the run was interrupted", out.Summary.Warnings)
	}
	raw, err := os.ReadFile(filepath.Join(dir, "summary.json"))
	if err != nil || !strings.Contains(string(raw), `"complete": false`) {
		t.Errorf("summary.json should say complete: false (err %v)", err)
	}
}

// TestUntilConverged: sampling is extended in rounds sized from the ESS
// so far until the convergence rule holds or the cap is reached, and the
// summary says so.
func TestUntilConverged(t *testing.T) {
	m, d := examples.SleepDiary()
	capped, err := Fit(context.Background(), Options{ModelPath: "m.yaml", ModelRaw: m, DataRaw: d, Chains: 2, Warmup: 50, Draws: 40,
		Seed: 3, SeedSet: true, UntilConverged: true, MaxDraws: 100})
	if err != nil {
		t.Fatal(err)
	}
	rl := capped.Summary.RunLength
	if rl == nil || rl.Rounds < 2 || rl.DrawsPerChain != 100 || rl.Converged || rl.StoppedBy != report.StopDrawCap {
		t.Errorf("capped run: %+v, want at least 2 rounds ending at the cap of 100 draws, not converged", rl)
	}
	if capped.Result.Kept[0] != 100 {
		t.Errorf("kept %d draws per chain, want 100", capped.Result.Kept[0])
	}
	done, err := Fit(context.Background(), Options{ModelPath: "m.yaml", ModelRaw: m, DataRaw: d, Chains: 4, Warmup: 300, Draws: 250,
		Seed: 3, SeedSet: true, UntilConverged: true, MaxDraws: 8000})
	if err != nil {
		t.Fatal(err)
	}
	if rl := done.Summary.RunLength; rl == nil || !rl.Converged {
		t.Fatalf("run did not converge within 8000 draws: %+v", rl)
	}
	if ok, worst := report.Converged(done.Result); !ok {
		t.Errorf("summary says converged but %s", worst)
	}
}

// fitDir runs the sleep-diary example into dir and returns the outcome.
func fitDir(t *testing.T, ctx context.Context, dir string, o Options) *Outcome {
	t.Helper()
	m, d := examples.SleepDiary()
	o.ModelPath, o.ModelRaw, o.DataRaw, o.OutDir, o.SeedSet = "m.yaml", m, d, dir, true
	out, err := Fit(ctx, o)
	if err != nil {
		t.Fatal(err)
	}
	return out
}

func readFile(t *testing.T, path string) []byte {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// sameOutputs requires byte-identical draws.csv and summary.json.
func sameOutputs(t *testing.T, want, got string) {
	t.Helper()
	for _, f := range []string{"draws.csv", "summary.json"} {
		if !bytes.Equal(readFile(t, filepath.Join(want, f)), readFile(t, filepath.Join(got, f))) {
			t.Errorf("%s of the resumed run differs from the uninterrupted run", f)
		}
	}
}

// TestResumeAfterInterrupt: a fit stopped part-way (Ctrl-C) is written,
// marked interrupted in run.json and summary.json, and keeps one
// checkpoint per chain; Resume finishes it with exactly the draws and
// summary of the fit never stopped, and removes the checkpoints.
func TestResumeAfterInterrupt(t *testing.T) {
	o := Options{FixedLength: true, Chains: 3, Warmup: 40, Draws: 60, Seed: 21, CheckpointEvery: 25, CheckpointSet: true}
	want := t.TempDir()
	fitDir(t, context.Background(), want, o)
	if _, err := os.Stat(filepath.Join(want, runfolder.CheckpointDir)); !os.IsNotExist(err) {
		t.Errorf("a complete run keeps its checkpoints (stat: %v)", err)
	}

	dir := t.TempDir()
	ctx, cancel := context.WithCancel(context.Background())
	var once sync.Once
	cut := o
	cut.Progress = func(chain, chains, done, total int) {
		if chain == 0 && done == 70 {
			once.Do(cancel)
		}
	}
	out := fitDir(t, ctx, dir, cut)
	if !out.Result.Incomplete || out.Record.Complete || out.Record.Status != runfolder.StatusInterrupted {
		t.Fatalf("stopped fit: incomplete %v, record complete %v status %q", out.Result.Incomplete, out.Record.Complete, out.Record.Status)
	}
	if s := string(readFile(t, filepath.Join(dir, "run.json"))); !strings.Contains(s, `"status": "interrupted"`) {
		t.Error("run.json does not say interrupted")
	}
	for c := 0; c < o.Chains; c++ {
		if _, err := os.Stat(runfolder.CheckpointFile(dir, c)); err != nil {
			t.Errorf("no checkpoint for chain %d: %v", c+1, err)
		}
	}
	// A new fit into the folder would throw the interrupted run away.
	m, d := examples.SleepDiary()
	if _, err := Fit(context.Background(), Options{FixedLength: true, ModelPath: "m.yaml", ModelRaw: m, DataRaw: d, OutDir: dir}); err == nil ||
		!strings.Contains(err.Error(), "--resume") {
		t.Errorf("fit into a folder with an unfinished run: got %v, want a refusal naming --resume", err)
	}
	res, err := Resume(context.Background(), ResumeOptions{RunDir: dir})
	if err != nil {
		t.Fatal(err)
	}
	if res.Result.Incomplete || !res.Record.Complete {
		t.Fatal("resumed run not complete")
	}
	sameOutputs(t, want, dir)
	if _, err := os.Stat(filepath.Join(dir, runfolder.CheckpointDir)); !os.IsNotExist(err) {
		t.Errorf("checkpoints kept after the run completed (stat: %v)", err)
	}
	if _, err := Resume(context.Background(), ResumeOptions{RunDir: dir}); err == nil || !strings.Contains(err.Error(), "already complete") {
		t.Errorf("resuming a complete run: got %v", err)
	}
}

// TestResumeAfterKill: a fit stopped without warning (as by a power cut or
// a cluster's time limit) leaves run.json saying "running" and the last
// periodic checkpoints, possibly none for some chains. Resume finishes it
// with the draws of the fit never stopped.
func TestResumeAfterKill(t *testing.T) {
	o := Options{FixedLength: true, Chains: 3, Warmup: 30, Draws: 50, Seed: 5, CheckpointEvery: 20, CheckpointSet: true}
	want := t.TempDir()
	fitDir(t, context.Background(), want, o)

	dir := t.TempDir()
	saved := t.TempDir()
	var mu sync.Mutex
	cut := o
	// Keep what the folder held right after chain 1's checkpoint at sweep
	// 40 and chain 2's at sweep 20; chain 3 is taken to have none.
	cut.Progress = func(chain, chains, done, total int) {
		mu.Lock()
		defer mu.Unlock()
		if (chain == 0 && done == 41) || (chain == 1 && done == 21) {
			b := readFile(t, runfolder.CheckpointFile(dir, chain))
			os.WriteFile(filepath.Join(saved, filepath.Base(runfolder.CheckpointFile(dir, chain))), b, 0o644)
		}
		if chain == 0 && done == 1 {
			os.WriteFile(filepath.Join(saved, "run.json"), readFile(t, filepath.Join(dir, "run.json")), 0o644)
		}
	}
	fitDir(t, context.Background(), dir, cut)
	// Put the folder back as the kill left it.
	os.RemoveAll(filepath.Join(dir, runfolder.CheckpointDir))
	os.Remove(filepath.Join(dir, "summary.json"))
	os.Remove(filepath.Join(dir, "draws.csv"))
	os.MkdirAll(filepath.Join(dir, runfolder.CheckpointDir), 0o755)
	for _, c := range []int{0, 1} {
		os.WriteFile(runfolder.CheckpointFile(dir, c), readFile(t, filepath.Join(saved, filepath.Base(runfolder.CheckpointFile(dir, c)))), 0o644)
	}
	running := readFile(t, filepath.Join(saved, "run.json"))
	if !strings.Contains(string(running), `"status": "running"`) {
		t.Fatalf("run.json during the fit does not say running:\n%s", running)
	}
	os.WriteFile(filepath.Join(dir, "run.json"), running, 0o644)
	if _, err := Resume(context.Background(), ResumeOptions{RunDir: dir}); err != nil {
		t.Fatal(err)
	}
	sameOutputs(t, want, dir)
}

// TestResumeUntilConverged: a fit extended in rounds and stopped in its
// second round resumes into that round and goes on as the fit never
// stopped would have.
func TestResumeUntilConverged(t *testing.T) {
	o := Options{Chains: 2, Warmup: 40, Draws: 30, Seed: 8, UntilConverged: true, MaxDraws: 100}
	want := t.TempDir()
	full := fitDir(t, context.Background(), want, o)
	if rl := full.Summary.RunLength; rl == nil || rl.Rounds < 2 {
		t.Fatalf("the uninterrupted fit should take several rounds: %+v", rl)
	}
	dir := t.TempDir()
	ctx, cancel := context.WithCancel(context.Background())
	var once sync.Once
	cut := o
	cut.Progress = func(chain, chains, done, total int) {
		if chain == 1 && done == 40+45 { // in the second round (30 -> 60 draws)
			once.Do(cancel)
		}
	}
	if out := fitDir(t, ctx, dir, cut); !out.Result.Incomplete {
		t.Fatal("stopped fit not incomplete")
	}
	if _, err := Resume(context.Background(), ResumeOptions{RunDir: dir}); err != nil {
		t.Fatal(err)
	}
	sameOutputs(t, want, dir)
}

// TestWideDataSameDraws: the sleep diary pivoted to wide layout (one row
// per nurse, columns rested_<day> and headache_<day>) gives draws
// identical to the long file's with the same seed.
func TestWideDataSameDraws(t *testing.T) {
	m, d := examples.SleepDiary()
	recs, err := csv.NewReader(bytes.NewReader(d)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	days := map[string]bool{}
	cells := map[string]map[string]string{} // nurse -> column -> value
	for _, r := range recs[1:] {
		if cells[r[0]] == nil {
			cells[r[0]] = map[string]string{}
		}
		days[r[1]] = true
		cells[r[0]]["rested_"+r[1]], cells[r[0]]["headache_"+r[1]] = r[2], r[3]
	}
	head := []string{"nurse"}
	for day := range days {
		head = append(head, "rested_"+day, "headache_"+day)
	}
	slices.Sort(head[1:])
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	w.Write(head)
	for nurse, c := range cells {
		row := []string{nurse}
		for _, h := range head[1:] {
			row = append(row, c[h]) // absent: empty, which is missing
		}
		w.Write(row)
	}
	w.Flush()
	wideModel := strings.Replace(string(m), "  occasion: day\n", "  layout: wide\n", 1)
	if wideModel == string(m) {
		t.Fatal("model file not changed to wide layout")
	}
	var draws [][]byte
	for _, in := range []struct{ model, data []byte }{{m, d}, {[]byte(wideModel), buf.Bytes()}} {
		dir := t.TempDir()
		if _, err := Fit(context.Background(), Options{FixedLength: true, ModelPath: "m.yaml", ModelRaw: in.model, DataRaw: in.data, OutDir: dir,
			Chains: 2, Warmup: 20, Draws: 30, Seed: 4, SeedSet: true}); err != nil {
			t.Fatal(err)
		}
		draws = append(draws, readFile(t, filepath.Join(dir, "draws.csv")))
	}
	if !bytes.Equal(draws[0], draws[1]) {
		t.Error("draws from wide data differ from those of the same data in long layout")
	}
}

// TestRunFolderLock: a fit or a resume refuses a folder held by a running
// process, and takes over a lock left by one that is gone.
func TestRunFolderLock(t *testing.T) {
	dir := t.TempDir()
	m, d := examples.SleepDiary()
	o := Options{FixedLength: true, ModelPath: "m.yaml", ModelRaw: m, DataRaw: d, OutDir: dir, Chains: 1, Warmup: 5, Draws: 5, Seed: 1, SeedSet: true}
	// Held by another fit (its operating-system lock).
	lock := filepath.Join(dir, runfolder.LockFile)
	release, err := runfolder.Lock(dir)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := Fit(context.Background(), o); err == nil || !strings.Contains(err.Error(), "in use by another lagstar fit") {
		t.Fatalf("fit into a locked folder: got %v", err)
	}
	release()
	if _, err := os.Stat(filepath.Join(dir, "run.json")); err == nil {
		t.Error("a refused fit wrote run.json")
	}
	// A lock file left by a process that is gone holds no lock.
	done := exec.Command("true")
	if err := done.Run(); err != nil {
		t.Skip("no true command")
	}
	if err := os.WriteFile(lock, []byte(strconv.Itoa(done.Process.Pid)+"\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	if _, err := Fit(context.Background(), o); err != nil {
		t.Fatalf("fit over a stale lock: %v", err)
	}
	if _, err := os.Stat(lock); !os.IsNotExist(err) {
		t.Errorf("lock left behind after the fit (stat: %v)", err)
	}
}

// TestWristPainExample: the bundled wide-layout example reads as 300
// employees over the six years named in its columns and fits.
func TestWristPainExample(t *testing.T) {
	m, d := examples.WristPain()
	out, err := Fit(context.Background(), Options{FixedLength: true, ModelPath: "wristpain/model.yaml", ModelRaw: m, DataRaw: d,
		Chains: 2, Warmup: 30, Draws: 30, Seed: 1, SeedSet: true, MaxDraws: 30})
	if err != nil {
		t.Fatal(err)
	}
	pan := out.Result.Layout.Panel
	if len(pan.Persons) != 300 || !slices.Equal(pan.Occasions, []int{2019, 2020, 2021, 2022, 2023, 2024}) || pan.Rows != 300 {
		t.Errorf("%d persons, %d rows, occasions %v", len(pan.Persons), pan.Rows, pan.Occasions)
	}
	if out.Result.Incomplete {
		t.Error("run incomplete")
	}
}

// TestCheckpointWriteFailure: when a checkpoint cannot be written (here
// the checkpoint folder is replaced by a file, as a full disk would refuse
// it), the fit stops, says how to go on, keeps run.json resumable, and a
// resume after the repair gives the draws of a fit never stopped.
func TestCheckpointWriteFailure(t *testing.T) {
	o := Options{FixedLength: true, Chains: 2, Warmup: 20, Draws: 40, Seed: 6, CheckpointEvery: 10, CheckpointSet: true}
	want := t.TempDir()
	fitDir(t, context.Background(), want, o)

	dir := t.TempDir()
	var once sync.Once
	cut := o
	cut.Progress = func(chain, chains, done, total int) {
		if done == 15 {
			once.Do(func() {
				os.RemoveAll(filepath.Join(dir, runfolder.CheckpointDir))
				os.WriteFile(filepath.Join(dir, runfolder.CheckpointDir), []byte("not a folder"), 0o644)
			})
		}
	}
	m, d := examples.SleepDiary()
	cut.ModelPath, cut.ModelRaw, cut.DataRaw, cut.OutDir, cut.SeedSet = "m.yaml", m, d, dir, true
	_, err := Fit(context.Background(), cut)
	if err == nil || !strings.Contains(err.Error(), "checkpoint") || !strings.Contains(err.Error(), "--resume "+dir) {
		t.Fatalf("got %v, want a checkpoint error that says how to resume", err)
	}
	if s := string(readFile(t, filepath.Join(dir, "run.json"))); !strings.Contains(s, `"status": "interrupted"`) {
		t.Fatalf("run.json after the failed checkpoint:\n%s", s)
	}
	os.Remove(filepath.Join(dir, runfolder.CheckpointDir))
	if _, err := Resume(context.Background(), ResumeOptions{RunDir: dir}); err != nil {
		t.Fatal(err)
	}
	sameOutputs(t, want, dir)
}

// TestResumeRebuildsLostSummary: a complete run whose summary.json is
// missing gets it back from --resume, rebuilt from draws.csv: the same
// parameter estimates and tabled derived quantities as the original, and
// a note saying it was rebuilt. A run.json that says complete is written
// only after the summary (the order in runfolder.WriteResult).
func TestResumeRebuildsLostSummary(t *testing.T) {
	m, d := examples.SleepDiary()
	dir := t.TempDir()
	out, err := Fit(context.Background(), Options{FixedLength: true, ModelPath: "m.yaml", ModelRaw: m, DataRaw: d, OutDir: dir,
		Chains: 2, Warmup: 20, Draws: 30, Seed: 4, SeedSet: true})
	if err != nil {
		t.Fatal(err)
	}
	os.Remove(filepath.Join(dir, runfolder.SummaryFile))
	re, err := Resume(context.Background(), ResumeOptions{RunDir: dir})
	if err != nil {
		t.Fatalf("resume of a complete run without summary.json: %v", err)
	}
	got, err := runfolder.ReadSummary(dir)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(strings.Join(got.Model.Notes, "\n"), "rebuilt from draws.csv") {
		t.Error("the rebuilt summary does not say so")
	}
	for _, pair := range [][2][]report.Entry{{out.Summary.Parameters, got.Parameters}, {out.Summary.Derived, re.Summary.Derived}} {
		if len(pair[0]) != len(pair[1]) {
			t.Fatalf("%d entries, want %d", len(pair[1]), len(pair[0]))
		}
		for k := range pair[0] {
			a, b := pair[0][k], pair[1][k]
			if a.Name != b.Name || math.Abs(float64(a.Mean-b.Mean)) > 1e-9*(1+math.Abs(float64(a.Mean))) || math.Abs(float64(a.Rhat-b.Rhat)) > 1e-6 {
				t.Errorf("%s: rebuilt mean %v R-hat %v, original %v %v", a.Name, b.Mean, b.Rhat, a.Mean, a.Rhat)
			}
		}
	}
	// With the summary there, the run is complete and resume refuses.
	if _, err := Resume(context.Background(), ResumeOptions{RunDir: dir}); err == nil || !strings.Contains(err.Error(), "already complete") {
		t.Errorf("second resume: %v, want already complete", err)
	}
}

// TestFailedOrMismatchedRunsRefused: check and compare on a failed run say
// to fit anew (not to resume, which would refuse), and compare refuses two
// runs of the same CSV with different outcomes.
func TestFailedOrMismatchedRunsRefused(t *testing.T) {
	m, d := examples.SleepDiary()
	both, one := t.TempDir(), t.TempDir()
	for _, c := range []struct {
		dir   string
		model []byte
	}{{both, m}, {one, []byte(strings.Replace(strings.Replace(strings.Replace(string(m), "  - name: headache\n    type: binary\n    labels: [\"no\", \"yes\"]\n", "", 1), "residual_correlation: true", "residual_correlation: false", 1), "lags: cross", "lags: own", 1))}} {
		if _, err := Fit(context.Background(), Options{FixedLength: true, ModelPath: "m.yaml", ModelRaw: c.model, DataRaw: d, OutDir: c.dir,
			Chains: 2, Warmup: 10, Draws: 10, Seed: 1, SeedSet: true}); err != nil {
			t.Fatal(err)
		}
	}
	if s, err := runfolder.ReadSummary(one); err != nil || len(s.Model.Outcomes) != 1 {
		t.Fatalf("the one-outcome model was not fitted as such (%v)", err)
	}
	_, err := Compare(CompareOptions{RunDirs: []string{both, one}, Draws: 4, GHKPoints: 10})
	if err == nil || !strings.Contains(err.Error(), "other responses") {
		t.Errorf("compare of different outcomes: %v, want a refusal", err)
	}
	rec, _, err := runfolder.Open(both)
	if err != nil {
		t.Fatal(err)
	}
	rec.Status, rec.Complete, rec.Error = runfolder.StatusFailed, false, "sampling failed: test"
	if err := runfolder.WriteRecord(both, rec); err != nil {
		t.Fatal(err)
	}
	if _, err := Check(CheckOptions{RunDir: both, Draws: 5}); err == nil || !strings.Contains(err.Error(), "fit the model anew") || strings.Contains(err.Error(), "--resume") {
		t.Errorf("check of a failed run: %v, want advice to fit anew", err)
	}
}

// TestCheckBelongsToItsRun: check.json records the fit it checked; a
// check.json of another fit in the folder (as a check racing a new fit
// would leave) is left out of the report with a warning; a check of a
// folder a fit holds is refused.
func TestCheckBelongsToItsRun(t *testing.T) {
	m, d := examples.SleepDiary()
	a, b := t.TempDir(), t.TempDir()
	for k, dir := range []string{a, b} {
		if _, err := Fit(context.Background(), Options{FixedLength: true, ModelPath: "m.yaml", ModelRaw: m, DataRaw: d, OutDir: dir,
			Chains: 2, Warmup: 10, Draws: 10, Seed: uint64(k + 1), SeedSet: true}); err != nil {
			t.Fatal(err)
		}
	}
	res, err := Check(CheckOptions{RunDir: a, Draws: 5})
	if err != nil {
		t.Fatal(err)
	}
	if res.Of == nil || res.Of.Seed != 1 {
		t.Fatalf("check.json does not name its run: %+v", res.Of)
	}
	os.WriteFile(filepath.Join(b, runfolder.CheckFile), readFile(t, filepath.Join(a, runfolder.CheckFile)), 0o644)
	_, s, err := HTMLReport(b)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(strings.Join(s.Warnings, "\n"), "does not belong to this fit") {
		t.Error("a check.json of another fit was not flagged")
	}
	if html := string(readFile(t, filepath.Join(b, runfolder.ReportFile))); strings.Contains(html, "Posterior predictive") && !strings.Contains(html, "does not belong") {
		t.Error("the report shows another fit's checks")
	}
	release, err := runfolder.Lock(a)
	if err != nil {
		t.Fatal(err)
	}
	defer release()
	if _, err := Check(CheckOptions{RunDir: a, Draws: 5}); err == nil || !strings.Contains(err.Error(), "in use") {
		t.Errorf("check of a locked folder: %v, want a refusal", err)
	}
}

// TestInterruptStopsEverything: a cancelled context (Ctrl-C, SIGTERM)
// stops check and compare with nothing written, and a fit cancelled while
// its data are read writes no run folder.
func TestInterruptStopsEverything(t *testing.T) {
	m, d := examples.SleepDiary()
	a, b := t.TempDir(), t.TempDir()
	for _, dir := range []string{a, b} {
		if _, err := Fit(context.Background(), Options{FixedLength: true, ModelPath: "m.yaml", ModelRaw: m, DataRaw: d, OutDir: dir,
			Chains: 2, Warmup: 10, Draws: 10, Seed: 1, SeedSet: true}); err != nil {
			t.Fatal(err)
		}
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := Check(CheckOptions{Ctx: ctx, RunDir: a, Draws: 5}); err == nil || !strings.Contains(err.Error(), "interrupted") {
		t.Errorf("check: %v, want interrupted", err)
	}
	if _, err := os.Stat(filepath.Join(a, runfolder.CheckFile)); !os.IsNotExist(err) {
		t.Error("an interrupted check wrote check.json")
	}
	out := filepath.Join(t.TempDir(), "cmp.json")
	if _, err := Compare(CompareOptions{Ctx: ctx, RunDirs: []string{a, b}, Draws: 4, GHKPoints: 10, Out: out}); err == nil || !strings.Contains(err.Error(), "interrupted") {
		t.Errorf("compare: %v, want interrupted", err)
	}
	if _, err := os.Stat(out); !os.IsNotExist(err) {
		t.Error("an interrupted compare wrote its file")
	}
	dir := filepath.Join(t.TempDir(), "new")
	if _, err := Fit(ctx, Options{FixedLength: true, ModelPath: "m.yaml", ModelRaw: m, DataRaw: d, OutDir: dir, Chains: 1, Draws: 5, Seed: 1, SeedSet: true}); err == nil || !strings.Contains(err.Error(), "before sampling") {
		t.Errorf("fit cancelled while loading: %v", err)
	}
	if _, err := os.Stat(dir); !os.IsNotExist(err) {
		t.Error("a fit cancelled while loading created its folder")
	}
}
