package fit

import (
	"context"
	"errors"
	"fmt"
	"os"
	"strings"
	"time"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/report"
	"github.com/lagstar/lagstar/runfolder"
	"github.com/lagstar/lagstar/sampler"
)

// ResumeOptions says which unfinished run to continue.
type ResumeOptions struct {
	RunDir   string
	Progress func(chain, chains, done, total int)
}

// Resume continues an unfinished fit (interrupted, or stopped without
// warning) from its run folder: the model and data copies, run.json's
// settings and each chain's last checkpoint (a chain without one starts
// afresh). The finished run folder equals that of a fit never stopped.
func Resume(ctx context.Context, o ResumeOptions) (out *Outcome, err error) {
	var jp *job
	defer recoverRun(&err, &jp)
	dir := o.RunDir
	rec, l, err := runfolder.Open(dir)
	if err != nil {
		return nil, err
	}
	unlock, err := runfolder.Lock(dir)
	if err != nil {
		return nil, err
	}
	defer unlock()
	switch {
	case (rec.Complete || rec.Status == runfolder.StatusComplete) && missing(dir, runfolder.SummaryFile):
		return rebuildSummary(dir)
	case rec.Complete || rec.Status == runfolder.StatusComplete:
		return nil, model.Inputf(dir, 0, "the run is already complete; there is nothing to resume")
	case rec.Status == runfolder.StatusFailed:
		return nil, model.Inputf(dir, 0, "the run failed (%s); resuming would fail again: fit it anew", rec.Error)
	case rec.Unfinished():
	default:
		return nil, model.Inputf(runfolder.Path(dir, runfolder.RunFile), 0, "status %q: expected running or interrupted", rec.Status)
	}
	if rec.Version != Version {
		return nil, model.Inputf(runfolder.Path(dir, runfolder.RunFile), 0, "written by lagstar %s; this is %s, whose draws could differ: resume with lagstar %s", rec.Version, Version, rec.Version)
	}
	opt, err := rec.SamplerOptions(dir)
	if err != nil {
		return nil, err
	}
	opt.Progress = o.Progress
	j := &job{l: l, opt: opt, dir: dir, level: rec.Level, started: rec.Started, priorWall: float64(rec.WallSeconds),
		untilConverged: rec.UntilConverged, maxDraws: rec.MaxDraws, rounds: max(rec.Rounds, 1),
		timeLimit: time.Duration(rec.TimeLimitSeconds * float64(time.Second)), begun: true}
	jp = j
	cps, err := runfolder.ReadCheckpoints(dir, opt.Chains)
	if err != nil {
		return nil, err
	}
	// Checkpoints are written once the chain's state has been handed over;
	// keep the folder, emptied only when the run completes.
	if j.opt.Checkpoint, err = runfolder.PrepareCheckpoints(dir); err != nil {
		return nil, err
	}
	rec.Status, rec.Complete = runfolder.StatusRunning, false
	if err := runfolder.WriteRecord(dir, rec); err != nil {
		return nil, fmt.Errorf("writing %s: %w", dir, err)
	}
	runner, err := sampler.Resume(ctx, l, j.opt, cps)
	if errors.Is(err, sampler.ErrCheckpoint) {
		return nil, model.Inputf(runfolder.Path(dir, runfolder.CheckpointDir), 0, "%s", strings.TrimPrefix(err.Error(), "checkpoint does not match this run: "))
	}
	if err != nil {
		return nil, j.failed(err)
	}
	return j.finish(ctx, runner)
}

// missing reports whether file name of run folder dir does not exist.
func missing(dir, name string) bool {
	_, err := os.Stat(runfolder.Path(dir, name))
	return errors.Is(err, os.ErrNotExist)
}

// rebuildSummary writes the summary.json of a complete run that lost it
// (a run written by an earlier version, or a file deleted), from its
// draws; it says so in the summary's notes.
func rebuildSummary(dir string) (*Outcome, error) {
	res, rec, err := runfolder.ReadResult(dir)
	if err != nil {
		return nil, err
	}
	sum := report.Build(res, rec.Level, Version)
	if rec.UntilConverged {
		rl := &report.RunLength{Rounds: max(rec.Rounds, 1), DrawsPerChain: rec.Draws, MaxDraws: rec.MaxDraws,
			Converged: sum.Converged, TimeLimitSeconds: rec.TimeLimitSeconds, StoppedBy: report.StopConverged}
		switch {
		case sum.Converged:
		case rec.Draws >= rec.MaxDraws:
			rl.StoppedBy = report.StopDrawCap
		default:
			rl.StoppedBy = report.StopTimeLimit
		}
		sum.RunLength = rl
	}
	sum.Model.Notes = append(sum.Model.Notes, "summary.json was rebuilt from draws.csv by lagstar fit --resume (derived quantities recomputed from the parameter draws)")
	b, err := sum.JSON()
	if err != nil {
		return nil, err
	}
	if err := runfolder.WriteFile(dir, runfolder.SummaryFile, b); err != nil {
		return nil, fmt.Errorf("writing %s: %w", dir, err)
	}
	return &Outcome{Summary: sum, Result: res, Record: rec}, nil
}
