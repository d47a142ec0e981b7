// Package fit runs lagstar's main job from start to end: it reads and checks
// the model file and data, enforces identification, samples the chains and
// writes the run folder. The command line is a thin layer over Fit.
package fit

import (
	"context"
	"crypto/rand"
	"encoding/binary"
	"errors"
	"fmt"
	"os"
	"runtime/debug"
	"time"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/priors"
	"github.com/lagstar/lagstar/report"
	"github.com/lagstar/lagstar/runfolder"
	"github.com/lagstar/lagstar/sampler"
)

// Version is the program version written into every output.
const Version = "0.1.0"

// Options says what to fit and how. Zero-valued sampler settings fall back
// to the model file, then to the defaults (4 chains, 1000 warm-up, 1000 draws).
type Options struct {
	// ModelPath names the model file. When ModelRaw is set it is used
	// instead of reading ModelPath, and DataRaw instead of the data file.
	ModelPath string
	// DataPath, when set, replaces the model file's data.csv (e.g. a
	// simulated panel fitted with the same model file).
	DataPath string
	ModelRaw []byte
	DataRaw  []byte

	OutDir                string // "" writes no files
	Chains, Warmup, Draws int    // 0: from the model file (Warmup: unless WarmupSet)
	WarmupSet             bool   // Warmup was given, even as 0
	Seed                  uint64
	SeedSet               bool
	Level                 float64 // central interval level; 0 means 0.95
	// A fit runs until converged unless FixedLength is set or the model
	// file says sampler.until_converged: false: it extends sampling in
	// rounds sized from the ESS rate so far (report.NextDraws) until
	// report.Converged holds, MaxDraws per chain (0: the model file's,
	// default 20000) is reached, or TimeLimit (0: the model file's, default
	// none) of sampling would be passed. UntilConverged forces it on over
	// the model file's false; FixedLength keeps the first round's draws.
	UntilConverged bool
	FixedLength    bool
	MaxDraws       int
	TimeLimit      time.Duration
	// CheckpointEvery (when CheckpointSet) overrides the model file's
	// sampler.checkpoint_every: sweeps between chain checkpoints.
	CheckpointEvery int
	CheckpointSet   bool
	// Overwrite lets a fit replace the lagstar run already in OutDir
	// (finished or not); without it such a folder is refused.
	Overwrite bool
	// MaxMemory caps the memory a run may plan to use, in bytes (0: 80%
	// of the machine's); a run whose estimate exceeds it is refused
	// before anything is allocated.
	MaxMemory int64
	Progress  func(chain, chains, done, total int)
}

// Outcome is what a fit produced.
type Outcome struct {
	Summary *report.Summary
	Result  *sampler.Result
	Record  runfolder.Record
}

// Prepare reads, checks and identifies the model, returning its layout.
// Every problem is a model.InputError.
func Prepare(o Options) (*sampler.Layout, error) {
	var sp *model.Spec
	var err error
	if o.ModelRaw != nil {
		sp, err = model.ParseSpec(o.ModelPath, o.ModelRaw)
	} else {
		sp, err = model.ReadSpec(o.ModelPath)
	}
	if err != nil {
		return nil, err
	}
	if o.DataPath != "" {
		if st, err := os.Stat(o.DataPath); err != nil || st.IsDir() {
			return nil, model.Inputf(o.DataPath, 0, "--data: expected a CSV file (it does not exist or is a folder)")
		}
		sp.Data.File = o.DataPath
	}
	var pan *model.Panel
	if o.DataRaw != nil {
		pan, err = model.ParsePanel(sp, sp.Data.File, o.DataRaw)
	} else {
		pan, err = model.LoadPanel(sp)
	}
	if err != nil {
		return nil, err
	}
	if err := model.Identify(sp, pan); err != nil {
		return nil, err
	}
	return sampler.NewLayout(sp, pan, priors.Default()), nil
}

// Fit prepares the model, samples and, when OutDir is set, writes
// summary.json, draws.csv and run.json. Bad input returns a
// model.InputError before anything is written. A cancelled ctx yields an
// incomplete run, written and marked as such, whose chain checkpoints
// (OutDir/checkpoints) let Resume finish it.
func Fit(ctx context.Context, o Options) (out *Outcome, err error) {
	var jp *job // set once the job exists, so a panic marks its folder failed
	defer recoverRun(&err, &jp)
	if o.Level == 0 {
		o.Level = 0.95
	}
	if !(o.Level > 0 && o.Level < 1) {
		return nil, model.Inputf("", 0, "--level: expected a number between 0 and 1, got %g", o.Level)
	}
	if o.CheckpointEvery < 0 {
		return nil, model.Inputf("", 0, "--checkpoint-every: expected a whole number >= 0, got %d", o.CheckpointEvery)
	}
	l, err := Prepare(o)
	if err != nil {
		return nil, err
	}
	if ctx.Err() != nil {
		// Stopped while the data were read: nothing has been written.
		return nil, errors.New("interrupted before sampling started: nothing written")
	}
	ss := l.Spec.Sampler
	opt := sampler.Options{Chains: ss.Chains, Warmup: ss.Warmup, Draws: ss.Draws, Seed: ss.Seed, ThresholdUpdate: ss.ThresholdUpdate,
		PathMoves: ss.PathMoves, Progress: o.Progress, CheckpointEvery: ss.CheckpointEvery}
	if o.Chains > 0 {
		opt.Chains = o.Chains
	}
	if o.Warmup > 0 || o.WarmupSet {
		opt.Warmup = o.Warmup
	}
	if o.Draws > 0 {
		opt.Draws = o.Draws
	}
	if o.CheckpointSet {
		opt.CheckpointEvery = o.CheckpointEvery
	}
	switch {
	case o.SeedSet:
		opt.Seed = o.Seed
	case !ss.SeedSet:
		opt.Seed = NewSeed()
	}
	j := &job{l: l, opt: opt, dir: o.OutDir, level: o.Level, started: time.Now(), rounds: 1,
		untilConverged: !o.FixedLength && (o.UntilConverged || ss.UntilConverged), maxDraws: ss.MaxDraws, timeLimit: ss.TimeLimit}
	jp = j
	if o.MaxDraws > 0 {
		j.maxDraws = o.MaxDraws
	}
	if o.TimeLimit > 0 {
		j.timeLimit = o.TimeLimit
	}
	if o.UntilConverged && o.FixedLength {
		return nil, model.Inputf("", 0, "--until-converged and --fixed-length contradict each other; give one")
	}
	if j.untilConverged && j.maxDraws < opt.Draws {
		j.maxDraws = opt.Draws // the cap never cuts the first round
	}
	if err := j.checkSizes(o.MaxMemory); err != nil {
		return nil, err
	}
	if j.dir != "" {
		// A folder that is a file or holds files of the user's is refused
		// before anything (even the lock) is written there.
		if _, _, err := runfolder.Inspect(j.dir); err != nil {
			return nil, err
		}
		if err := os.MkdirAll(j.dir, 0o755); err != nil {
			return nil, fmt.Errorf("create output folder: %w", err)
		}
		unlock, err := runfolder.Lock(j.dir)
		if err != nil {
			return nil, err
		}
		defer unlock()
		state, rec, err := runfolder.Inspect(j.dir)
		if err != nil {
			return nil, err
		}
		switch {
		case state == runfolder.Unfinished && !o.Overwrite:
			return nil, model.Inputf(j.dir, 0, "holds an unfinished run; finish it with lagstar fit --resume %s, choose another --out folder, or give --overwrite to discard it", j.dir)
		case state == runfolder.Finished && !o.Overwrite:
			return nil, model.Inputf(j.dir, 0, "holds a finished run (status %s, started %s); give --overwrite to replace it (all its files and figures are removed first), or choose another --out folder", rec.Status, rec.Started.Format("2006-01-02 15:04"))
		case state != runfolder.NoRun:
			if err := runfolder.Clear(j.dir); err != nil {
				return nil, fmt.Errorf("removing the earlier run in %s: %w", j.dir, err)
			}
		}
		if err := runfolder.Begin(j.dir, l.Panel.Raw, j.record(nil)); err != nil {
			return nil, fmt.Errorf("writing %s: %w", j.dir, err)
		}
		j.begun = true
		if j.opt.Checkpoint, err = runfolder.PrepareCheckpoints(j.dir); err != nil {
			return nil, err
		}
	}
	runner, err := sampler.Start(ctx, l, j.opt)
	if err != nil {
		return nil, j.failed(err)
	}
	return j.finish(ctx, runner)
}

// failed records in run.json that sampling stopped on err (so the folder
// is neither taken for a result nor offered for resuming) and returns the
// error to report.
func (j *job) failed(err error) error {
	var se *sampler.SaveError
	if errors.As(err, &se) && j.dir != "" {
		// Nothing is wrong with the run, only with writing it (a full
		// disk): keep the checkpoints written so far for a resume.
		err = fmt.Errorf("the run stopped: %w; make room (or repair %s) and finish it with lagstar fit --resume %s", err, j.dir, j.dir)
		rec := j.record(nil)
		rec.Status, rec.Error = runfolder.StatusInterrupted, err.Error()
		if werr := runfolder.WriteRecord(j.dir, rec); werr != nil {
			return fmt.Errorf("%w (and writing run.json: %v)", err, werr)
		}
		return err
	}
	err = fmt.Errorf("sampling failed: %w", err)
	if j.dir != "" {
		rec := j.record(nil)
		rec.Status, rec.Error = runfolder.StatusFailed, err.Error()
		if werr := runfolder.WriteRecord(j.dir, rec); werr != nil {
			return fmt.Errorf("%w (and writing %s: %v)", err, j.dir, werr)
		}
		runfolder.RemoveCheckpoints(j.dir)
	}
	return err
}

// job is one fit on its way: what it runs and where it writes.
type job struct {
	l              *sampler.Layout
	opt            sampler.Options
	dir            string
	level          float64
	started        time.Time
	priorWall      float64 // seconds spent before a resume
	untilConverged bool
	maxDraws       int
	timeLimit      time.Duration
	rounds         int
	// begun says the folder holds this job's run (run.json written), so a
	// failure may be recorded there.
	begun bool
}

// record is the run.json of the job: of res when it is not nil, else of a
// fit that is starting or between rounds.
func (j *job) record(res *sampler.Result) runfolder.Record {
	running := res == nil
	if running {
		res = &sampler.Result{Layout: j.l, Options: j.opt, Kept: make([]int, j.opt.Chains)}
	}
	rec := runfolder.NewRecord(res, Version, j.started)
	if running {
		rec.Status, rec.Complete = runfolder.StatusRunning, false
	}
	rec.Level, rec.UntilConverged, rec.CheckpointEvery = j.level, j.untilConverged, j.opt.CheckpointEvery
	if j.untilConverged {
		rec.MaxDraws, rec.Rounds = j.maxDraws, j.rounds
		rec.TimeLimitSeconds = j.timeLimit.Seconds()
	}
	rec.WallSeconds += report.Num(j.priorWall)
	return rec
}

// finish samples the further rounds of a run until converged (when asked),
// summarises and writes the run folder. Checkpoints are removed once the
// run is complete.
func (j *job) finish(ctx context.Context, runner *sampler.Runner) (*Outcome, error) {
	res := runner.Result()
	var rl *report.RunLength
	if j.untilConverged {
		rl = &report.RunLength{MaxDraws: j.maxDraws, TimeLimitSeconds: j.timeLimit.Seconds()}
		// Seconds per kept sweep per chain, measured over the last round
		// (the first round's warm-up sweeps cost the same).
		perSweep := res.Elapsed.Seconds() / float64(max(j.opt.Warmup+res.Options.Draws, 1))
		for {
			c := report.CheckConvergence(res)
			rl.Converged = c.OK
			switch {
			case res.Incomplete:
				rl.StoppedBy = report.StopInterrupted
			case c.OK:
				rl.StoppedBy = report.StopConverged
			case ctx.Err() != nil:
				// Stopped between rounds: the run has not reached its end.
				res.Incomplete = true
				rl.StoppedBy = report.StopInterrupted
			case res.Options.Draws >= j.maxDraws:
				rl.StoppedBy = report.StopDrawCap
			}
			if rl.StoppedBy != "" {
				break
			}
			next := report.NextDraws(c, res.Options.Draws, j.maxDraws)
			if j.timeLimit > 0 {
				left := j.timeLimit.Seconds() - j.priorWall - res.Elapsed.Seconds()
				if fits := int(left / perSweep); res.Options.Draws+fits < next {
					next = res.Options.Draws + fits
				}
				// A round too short to change the verdict is not started.
				if next-res.Options.Draws < max(res.Options.Draws/10, 1) {
					rl.StoppedBy = report.StopTimeLimit
					break
				}
			}
			j.rounds++
			before, drawsBefore := res.Elapsed, res.Options.Draws
			j.opt.Draws = next
			if j.dir != "" {
				// A run stopped without warning in this round resumes into it.
				rec := j.record(nil)
				rec.Kept = res.Kept
				if err := runfolder.WriteRecord(j.dir, rec); err != nil {
					return nil, fmt.Errorf("writing %s: %w", j.dir, err)
				}
			}
			if err := runner.Extend(ctx, j.opt.Draws-res.Options.Draws); err != nil {
				return nil, j.failed(err)
			}
			if done := res.Options.Draws - drawsBefore; done > 0 {
				perSweep = (res.Elapsed - before).Seconds() / float64(done)
			}
		}
		rl.Rounds = j.rounds
		rl.DrawsPerChain = res.Options.Draws
	}
	sum := report.Build(res, j.level, Version)
	sum.RunLength = rl
	rec := j.record(res)
	if j.dir != "" {
		if err := runfolder.WriteResult(j.dir, res, sum, rec); err != nil {
			return nil, fmt.Errorf("writing %s: %w", j.dir, err)
		}
		if !res.Incomplete {
			if err := runfolder.RemoveCheckpoints(j.dir); err != nil {
				return nil, err
			}
		}
	}
	return &Outcome{Summary: sum, Result: res, Record: rec}, nil
}

// NewSeed returns a fresh random seed for runs that name none.
func NewSeed() uint64 {
	var b [8]byte
	if _, err := rand.Read(b[:]); err != nil {
		return uint64(time.Now().UnixNano())
	}
	return binary.LittleEndian.Uint64(b[:]) >> 11 // keep it short enough to type
}

// checkSizes refuses, before anything is allocated or written, sizes out
// of their ranges and a run whose memory estimate exceeds the cap.
func (j *job) checkSizes(maxMemory int64) error {
	o := j.opt
	for _, c := range []struct {
		flag      string
		v, lo, hi int
	}{{"--chains", o.Chains, 1, MaxChains}, {"--draws", o.Draws, 1, MaxDraws}, {"--warmup", o.Warmup, 0, MaxDraws},
		{"--max-draws", j.maxDraws, 1, MaxDraws}, {"--checkpoint-every", o.CheckpointEvery, 0, MaxDraws}} {
		if err := checkRange(c.flag, c.v, c.lo, c.hi); err != nil {
			return err
		}
	}
	draws, what := o.Draws, "--draws"
	if j.untilConverged {
		draws, what = max(o.Draws, j.maxDraws), "--max-draws (a run until converged may grow to it)"
	}
	need, have := fitMemory(j.l, o.Chains, draws), MemoryCap(maxMemory)
	if need > have {
		return model.Inputf("", 0, "the run would need about %s of memory (%d chains x %d draws of %d quantities, and the data), more than the %s allowed (--max-memory, default 80%% of this machine's); lower %s or --chains, or raise --max-memory",
			Bytes(need), o.Chains, draws, len(j.l.Params())+len(j.l.DerivedParams()), Bytes(have), what)
	}
	return nil
}

// recoverRun turns a panic of the calling goroutine into an InternalError
// in *err and, when the job *jp writes a folder, marks its run failed.
func recoverRun(err *error, jp **job) {
	p := recover()
	if p == nil {
		return
	}
	*err = &sampler.InternalError{Value: p, Stack: string(debug.Stack())}
	if j := *jp; j != nil && j.dir != "" && j.begun {
		*err = j.failed(*err)
	}
}
