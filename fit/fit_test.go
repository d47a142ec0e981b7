package fit

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"sync"
	"testing"

	"github.com/lagstar/lagstar/examples"
	"github.com/lagstar/lagstar/report"
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
		_, err := Fit(context.Background(), Options{ModelPath: "sleepdiary/model.yaml", ModelRaw: m, DataRaw: d,
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
		out, err := Fit(context.Background(), Options{ModelPath: "m.yaml", ModelRaw: m, DataRaw: d, Chains: 1, Warmup: 5, Draws: 5, Seed: seed, SeedSet: true})
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
	out, err := Fit(ctx, Options{ModelPath: "m.yaml", ModelRaw: m, DataRaw: d, OutDir: dir, Chains: 2, Warmup: 10, Draws: 100000, Seed: 1, SeedSet: true,
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

// TestUntilConverged: sampling is extended in doubling rounds until the
// convergence rule holds or the cap is reached, and the summary says so.
func TestUntilConverged(t *testing.T) {
	m, d := examples.SleepDiary()
	capped, err := Fit(context.Background(), Options{ModelPath: "m.yaml", ModelRaw: m, DataRaw: d, Chains: 2, Warmup: 50, Draws: 40,
		Seed: 3, SeedSet: true, UntilConverged: true, MaxDraws: 100})
	if err != nil {
		t.Fatal(err)
	}
	rl := capped.Summary.RunLength
	if rl == nil || rl.Rounds != 3 || rl.DrawsPerChain != 100 || rl.Converged {
		t.Errorf("capped run: %+v, want 3 rounds (40, 80, 100 draws) and not converged", rl)
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
