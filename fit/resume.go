package fit

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/report"
	"github.com/lagstar/lagstar/sampler"
)

// checkpointDir is the folder of a run folder that holds one checkpoint
// per chain while the run is unfinished.
const checkpointDir = "checkpoints"

func checkpointFile(dir string, chain int) string {
	return filepath.Join(dir, checkpointDir, fmt.Sprintf("chain-%d.ckpt", chain+1))
}

// prepareCheckpoints makes the job's checkpoint folder (an earlier run's
// checkpoints were removed by clearRun) and makes the chains write their
// checkpoints there, each atomically.
func (j *job) prepareCheckpoints() error {
	cd := filepath.Join(j.dir, checkpointDir)
	if err := os.MkdirAll(cd, 0o755); err != nil {
		return err
	}
	j.opt.Checkpoint = func(chain int, data []byte) error {
		return report.WriteAtomic(checkpointFile(j.dir, chain), data)
	}
	return nil
}

// ResumeOptions says which unfinished run to continue.
type ResumeOptions struct {
	RunDir   string
	Progress func(chain, chains, done, total int)
}

// Resume continues an unfinished fit (interrupted, or stopped without
// warning) from its run folder: the model and data copies, run.json's
// settings and each chain's last checkpoint (a chain without one starts
// afresh). The finished run folder equals that of a fit never stopped.
func Resume(ctx context.Context, o ResumeOptions) (*Outcome, error) {
	dir := o.RunDir
	rec, l, err := openRun(dir)
	if err != nil {
		return nil, err
	}
	unlock, err := lockRun(dir)
	if err != nil {
		return nil, err
	}
	defer unlock()
	switch {
	case rec.Complete || rec.Status == report.StatusComplete:
		return nil, model.Inputf(dir, 0, "the run is already complete; there is nothing to resume")
	case rec.Status == report.StatusFailed:
		return nil, model.Inputf(dir, 0, "the run failed (%s); resuming would fail again: fit it anew", rec.Error)
	case rec.Status == report.StatusRunning || rec.Status == report.StatusInterrupted:
	default:
		return nil, model.Inputf(filepath.Join(dir, "run.json"), 0, "status %q: expected running or interrupted", rec.Status)
	}
	if rec.Version != Version {
		return nil, model.Inputf(filepath.Join(dir, "run.json"), 0, "written by lagstar %s; this is %s, whose draws could differ: resume with lagstar %s", rec.Version, Version, rec.Version)
	}
	if rec.Chains < 1 || rec.Draws < 1 || rec.Warmup < 0 || !(rec.Level > 0 && rec.Level < 1) || rec.CheckpointEvery < 0 {
		return nil, model.Inputf(filepath.Join(dir, "run.json"), 0, "its sampler settings are not valid (chains %d, warmup %d, draws %d, level %g)", rec.Chains, rec.Warmup, rec.Draws, rec.Level)
	}
	opt := sampler.Options{Chains: rec.Chains, Warmup: rec.Warmup, Draws: rec.Draws, Seed: rec.Seed,
		ThresholdUpdate: model.ThresholdUpdate(rec.ThresholdUpdate), PathMoves: rec.PathMoves,
		CheckpointEvery: rec.CheckpointEvery, Progress: o.Progress}
	j := &job{l: l, opt: opt, dir: dir, level: rec.Level, started: rec.Started, priorWall: float64(rec.WallSeconds),
		untilConverged: rec.UntilConverged, maxDraws: rec.MaxDraws, rounds: max(rec.Rounds, 1)}
	cps := make([][]byte, opt.Chains)
	for c := range cps {
		b, err := os.ReadFile(checkpointFile(dir, c))
		switch {
		case errors.Is(err, os.ErrNotExist):
			// Stopped before this chain's first checkpoint: it starts afresh.
		case err != nil:
			return nil, model.Inputf(checkpointFile(dir, c), 0, "cannot read: %v", err)
		default:
			cps[c] = b
		}
	}
	// Checkpoints are written once the chain's state has been handed over;
	// keep the folder, emptied only when the run completes.
	if err := os.MkdirAll(filepath.Join(dir, checkpointDir), 0o755); err != nil {
		return nil, err
	}
	j.opt.Checkpoint = func(chain int, data []byte) error {
		return report.WriteAtomic(checkpointFile(dir, chain), data)
	}
	rec.Status, rec.Complete = report.StatusRunning, false
	if err := report.WriteRunRecord(dir, rec); err != nil {
		return nil, fmt.Errorf("writing %s: %w", dir, err)
	}
	runner, err := sampler.Resume(ctx, l, j.opt, cps)
	if errors.Is(err, sampler.ErrCheckpoint) {
		return nil, model.Inputf(filepath.Join(dir, checkpointDir), 0, "%s", strings.TrimPrefix(err.Error(), "checkpoint does not match this run: "))
	}
	if err != nil {
		return nil, j.failed(err)
	}
	return j.finish(ctx, runner)
}
