package runfolder

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/priors"
	"github.com/lagstar/lagstar/sampler"
)

// TestRecordMapsSamplerSettings: the sampler settings written into run.json
// by NewRecord come back unchanged from SamplerOptions, and settings that
// cannot be run are refused naming run.json.
func TestRecordMapsSamplerSettings(t *testing.T) {
	sp, err := model.ParseSpec("m.yaml", []byte("data: {csv: d.csv, person: p, occasion: t}\noutcomes: [{name: y, type: binary}]\n"))
	if err != nil {
		t.Fatal(err)
	}
	pan, err := model.ParsePanel(sp, "d.csv", []byte("p,t,y\n1,1,0\n1,2,1\n2,1,1\n2,2,0\n3,1,1\n3,2,1\n"))
	if err != nil {
		t.Fatal(err)
	}
	l := sampler.NewLayout(sp, pan, priors.Default())
	opt := sampler.Options{Chains: 3, Warmup: 7, Draws: 11, Seed: 42, ThresholdUpdate: model.ThresholdJoint, PathMoves: true, CheckpointEvery: 5}
	rec := NewRecord(&sampler.Result{Layout: l, Options: opt, Kept: []int{11, 11, 11}}, "test", time.Unix(0, 0))
	rec.Level = 0.9
	got, err := rec.SamplerOptions("run")
	if err != nil {
		t.Fatal(err)
	}
	if got.Chains != opt.Chains || got.Warmup != opt.Warmup || got.Draws != opt.Draws || got.Seed != opt.Seed ||
		got.ThresholdUpdate != opt.ThresholdUpdate || got.PathMoves != opt.PathMoves || got.CheckpointEvery != opt.CheckpointEvery {
		t.Errorf("SamplerOptions gave %+v, want %+v", got, opt)
	}
	if rec.Status != StatusComplete || !rec.Complete {
		t.Errorf("status %q complete %v, want complete", rec.Status, rec.Complete)
	}
	rec.Chains = 0
	var ie *model.InputError
	if _, err := rec.SamplerOptions("run"); !errors.As(err, &ie) || ie.File != filepath.Join("run", RunFile) {
		t.Errorf("zero chains: %v, want an input error naming run/run.json", err)
	}
}

// TestClearLeavesOtherFiles: Clear removes lagstar's files, figures and
// checkpoints and nothing else.
func TestClearLeavesOtherFiles(t *testing.T) {
	dir := t.TempDir()
	for _, n := range []string{RunFile, SummaryFile, DrawsFile, DataFile, CheckFile, ReportFile, CheckFigure("transition", 1), CheckFigure("transition", 2), "notes.txt"} {
		os.WriteFile(filepath.Join(dir, n), []byte("x"), 0o644)
	}
	os.MkdirAll(filepath.Join(dir, CheckpointDir), 0o755)
	os.WriteFile(CheckpointFile(dir, 0), []byte("x"), 0o644)
	if err := Clear(dir); err != nil {
		t.Fatal(err)
	}
	left, _ := os.ReadDir(dir)
	if len(left) != 1 || left[0].Name() != "notes.txt" {
		names := []string{}
		for _, e := range left {
			names = append(names, e.Name())
		}
		t.Errorf("left %v, want only notes.txt", names)
	}
}

// TestLockExclusive: many takers racing for one folder's lock (each a
// separate open, as separate processes are) never hold it two at a time,
// and every one of them gets it in the end.
func TestLockExclusive(t *testing.T) {
	dir := t.TempDir()
	var holders, maxHolders, taken atomic.Int32
	var wg sync.WaitGroup
	for g := 0; g < 8; g++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for got := 0; got < 30; {
				release, err := Lock(dir)
				if err != nil {
					if !strings.Contains(err.Error(), "in use by") {
						t.Errorf("Lock: %v", err)
						return
					}
					continue
				}
				if n := holders.Add(1); n > maxHolders.Load() {
					maxHolders.Store(n)
				}
				time.Sleep(50 * time.Microsecond)
				holders.Add(-1)
				release()
				taken.Add(1)
				got++
			}
		}()
	}
	wg.Wait()
	if maxHolders.Load() != 1 || taken.Load() != 240 {
		t.Errorf("at most %d holders at once (want 1), %d locks taken (want 240)", maxHolders.Load(), taken.Load())
	}
}

// TestLockRemovesKilledWrites: temporary files a killed write left behind
// are removed when the lock is next taken.
func TestLockRemovesKilledWrites(t *testing.T) {
	dir := t.TempDir()
	os.MkdirAll(filepath.Join(dir, CheckpointDir), 0o755)
	for _, n := range []string{".summary.json.tmp123", filepath.Join(CheckpointDir, ".chain-1.ckpt.tmp9")} {
		os.WriteFile(filepath.Join(dir, n), []byte("half"), 0o644)
	}
	release, err := Lock(dir)
	if err != nil {
		t.Fatal(err)
	}
	release()
	for _, pat := range []string{".*.tmp*", filepath.Join(CheckpointDir, ".*.tmp*")} {
		if m, _ := filepath.Glob(filepath.Join(dir, pat)); len(m) > 0 {
			t.Errorf("left behind: %v", m)
		}
	}
}
