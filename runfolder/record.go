package runfolder

import (
	"runtime"
	"time"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/report"
	"github.com/lagstar/lagstar/sampler"
)

// Record is the content of run.json: what is needed to reproduce a run.
type Record struct {
	Program         string  `json:"program"`
	Version         string  `json:"version"`
	GoVersion       string  `json:"go_version"`
	ModelFile       string  `json:"model_file"`
	ModelContent    string  `json:"model_content"`
	DataFile        string  `json:"data_file"`
	DataSHA256      string  `json:"data_sha256"`
	Seed            uint64  `json:"seed"`
	Chains          int     `json:"chains"`
	Warmup          int     `json:"warmup"`
	Draws           int     `json:"draws"`
	ThresholdUpdate string  `json:"threshold_update"`
	PathMoves       bool    `json:"path_moves"`
	CheckpointEvery int     `json:"checkpoint_every"`
	Level           float64 `json:"level"`
	UntilConverged  bool    `json:"until_converged,omitempty"`
	MaxDraws        int     `json:"max_draws,omitempty"`
	Rounds          int     `json:"rounds,omitempty"`
	// TimeLimitSeconds is the run-until-converged time limit (0: none).
	TimeLimitSeconds float64 `json:"time_limit_seconds,omitempty"`
	// Status is "running" while a fit runs (a folder left so was stopped
	// without warning: resume it), "interrupted" when it was stopped and
	// wrote what it had, "complete" when it finished, "failed" when the
	// sampler stopped on an error (Error says which).
	Status      string     `json:"status"`
	Error       string     `json:"error,omitempty"`
	Complete    bool       `json:"complete"`
	Kept        []int      `json:"kept_draws"`
	WallSeconds report.Num `json:"wall_seconds"`
	Started     time.Time  `json:"started"`
}

// Run statuses in run.json.
const (
	StatusRunning     = "running"
	StatusInterrupted = "interrupted"
	StatusComplete    = "complete"
	StatusFailed      = "failed"
)

// NewRecord fills a Record from a result: the sampler settings go into
// the record here, and come back out in SamplerOptions.
func NewRecord(res *sampler.Result, version string, started time.Time) Record {
	l := res.Layout
	o := res.Options
	status := StatusComplete
	if res.Incomplete {
		status = StatusInterrupted
	}
	return Record{Program: report.Program, Version: version, GoVersion: runtime.Version(),
		ModelFile: l.Spec.Path, ModelContent: string(l.Spec.Raw), DataFile: l.Panel.File, DataSHA256: l.Panel.SHA256,
		Seed: o.Seed, Chains: o.Chains, Warmup: o.Warmup, Draws: o.Draws,
		ThresholdUpdate: string(o.ThresholdUpdate), PathMoves: o.PathMoves, CheckpointEvery: o.CheckpointEvery,
		Complete: !res.Incomplete, Status: status, Kept: res.Kept,
		WallSeconds: report.Num(res.Elapsed.Seconds()), Started: started.UTC()}
}

// SamplerOptions returns the sampler settings the record holds (the
// inverse of NewRecord), or an InputError naming run.json when they are
// not valid.
func (r Record) SamplerOptions(dir string) (sampler.Options, error) {
	if r.Chains < 1 || r.Draws < 1 || r.Warmup < 0 || !(r.Level > 0 && r.Level < 1) || r.CheckpointEvery < 0 {
		return sampler.Options{}, model.Inputf(Path(dir, RunFile), 0, "its sampler settings are not valid (chains %d, warmup %d, draws %d, level %g)", r.Chains, r.Warmup, r.Draws, r.Level)
	}
	return sampler.Options{Chains: r.Chains, Warmup: r.Warmup, Draws: r.Draws, Seed: r.Seed,
		ThresholdUpdate: model.ThresholdUpdate(r.ThresholdUpdate), PathMoves: r.PathMoves,
		CheckpointEvery: r.CheckpointEvery}, nil
}

// Unfinished reports whether the record is of a run that is running or
// was interrupted (one to resume).
func (r Record) Unfinished() bool {
	return r.Status == StatusRunning || r.Status == StatusInterrupted
}

// ID identifies the run of the record (for files made from it later, such
// as check.json): when it started, its data and its seed.
func (r Record) ID() (started, dataSHA256 string, seed uint64) {
	return r.Started.UTC().Format(time.RFC3339Nano), r.DataSHA256, r.Seed
}
