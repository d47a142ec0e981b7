// Package fit runs lagstar's main job from start to end: it reads and checks
// the model file and data, enforces identification, samples the chains and
// writes the run folder. The command line is a thin layer over Fit.
package fit

import (
	"context"
	"crypto/rand"
	"encoding/binary"
	"fmt"
	"time"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/priors"
	"github.com/lagstar/lagstar/report"
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
	ModelRaw  []byte
	DataRaw   []byte

	OutDir                string // "" writes no files
	Chains, Warmup, Draws int    // 0: from the model file
	Seed                  uint64
	SeedSet               bool
	Level                 float64 // central interval level; 0 means 0.95
	// UntilConverged (or the model file's sampler.until_converged) extends
	// sampling in rounds, doubling the draws, until report.Converged holds
	// or MaxDraws per chain (0: the model file's, default 20000) is reached.
	UntilConverged bool
	MaxDraws       int
	Progress       func(chain, chains, done, total int)
}

// Outcome is what a fit produced.
type Outcome struct {
	Summary *report.Summary
	Result  *sampler.Result
	Record  report.RunRecord
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
// incomplete run, written and marked as such.
func Fit(ctx context.Context, o Options) (*Outcome, error) {
	if o.Level == 0 {
		o.Level = 0.95
	}
	if !(o.Level > 0 && o.Level < 1) {
		return nil, model.Inputf("", 0, "--level: expected a number between 0 and 1, got %g", o.Level)
	}
	l, err := Prepare(o)
	if err != nil {
		return nil, err
	}
	ss := l.Spec.Sampler
	opt := sampler.Options{Chains: ss.Chains, Warmup: ss.Warmup, Draws: ss.Draws, Seed: ss.Seed, ThresholdUpdate: ss.ThresholdUpdate,
		PathMoves: ss.PathMoves, Progress: o.Progress}
	if o.Chains > 0 {
		opt.Chains = o.Chains
	}
	if o.Warmup > 0 {
		opt.Warmup = o.Warmup
	}
	if o.Draws > 0 {
		opt.Draws = o.Draws
	}
	switch {
	case o.SeedSet:
		opt.Seed = o.Seed
	case !ss.SeedSet:
		opt.Seed = NewSeed()
	}
	started := time.Now()
	runner, err := sampler.Start(ctx, l, opt)
	if err != nil {
		return nil, fmt.Errorf("sampling failed: %w", err)
	}
	res := runner.Result()
	var rl *report.RunLength
	if o.UntilConverged || ss.UntilConverged {
		maxDraws := ss.MaxDraws
		if o.MaxDraws > 0 {
			maxDraws = o.MaxDraws
		}
		rl = &report.RunLength{Rounds: 1, MaxDraws: maxDraws}
		for {
			ok, _ := report.Converged(res)
			rl.Converged = ok
			if ok || res.Options.Draws >= maxDraws || ctx.Err() != nil || res.Incomplete {
				break
			}
			if err := runner.Extend(ctx, min(res.Options.Draws, maxDraws-res.Options.Draws)); err != nil {
				return nil, fmt.Errorf("sampling failed: %w", err)
			}
			rl.Rounds++
		}
		rl.DrawsPerChain = res.Options.Draws
	}
	sum := report.Build(res, o.Level, Version)
	sum.RunLength = rl
	rec := report.NewRunRecord(res, Version, started)
	if o.OutDir != "" {
		if err := report.WriteRun(o.OutDir, res, sum, rec); err != nil {
			return nil, fmt.Errorf("writing %s: %w", o.OutDir, err)
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
