package report

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"github.com/lagstar/lagstar/catalog"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"time"

	"github.com/lagstar/lagstar/sampler"
)

// DrawsCSV renders the kept draws: columns chain, draw, then one per
// parameter and per tabled derived quantity (standardized paths, ICC).
func DrawsCSV(res *sampler.Result) ([]byte, error) {
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	head := []string{"chain", "draw"}
	var dIdx []int
	for _, p := range res.Params {
		head = append(head, p.Name)
	}
	for i, p := range res.Derived {
		if catalog.Tabled(p.Kind) {
			head = append(head, p.Name)
			dIdx = append(dIdx, i)
		}
	}
	if err := w.Write(head); err != nil {
		return nil, err
	}
	np, nd := len(res.Params), len(res.Derived)
	rec := make([]string, len(head))
	for c := range res.Draws {
		for d := 0; d < res.Kept[c]; d++ {
			rec = rec[:0]
			rec = append(rec, strconv.Itoa(c+1), strconv.Itoa(d+1))
			for p := 0; p < np; p++ {
				rec = append(rec, strconv.FormatFloat(res.Draws[c][d*np+p], 'g', -1, 64))
			}
			for _, i := range dIdx {
				rec = append(rec, strconv.FormatFloat(res.DerivedDraws[c][d*nd+i], 'g', -1, 64))
			}
			if err := w.Write(rec); err != nil {
				return nil, err
			}
		}
	}
	w.Flush()
	return buf.Bytes(), w.Error()
}

// RunRecord is the content of run.json: what is needed to reproduce a run.
type RunRecord struct {
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
	// Status is "running" while a fit runs (a folder left so was stopped
	// without warning: resume it), "interrupted" when it was stopped and
	// wrote what it had, "complete" when it finished, "failed" when the
	// sampler stopped on an error (Error says which).
	Status      string    `json:"status"`
	Error       string    `json:"error,omitempty"`
	Complete    bool      `json:"complete"`
	Kept        []int     `json:"kept_draws"`
	WallSeconds Num       `json:"wall_seconds"`
	Started     time.Time `json:"started"`
}

// NewRunRecord fills a RunRecord from a result.
func NewRunRecord(res *sampler.Result, version string, started time.Time) RunRecord {
	l := res.Layout
	return RunRecord{Program: Program, Version: version, GoVersion: runtime.Version(),
		ModelFile: l.Spec.Path, ModelContent: string(l.Spec.Raw), DataFile: l.Panel.File, DataSHA256: l.Panel.SHA256,
		Seed: res.Options.Seed, Chains: res.Options.Chains, Warmup: res.Options.Warmup, Draws: res.Options.Draws,
		ThresholdUpdate: string(res.Options.ThresholdUpdate), PathMoves: res.Options.PathMoves, CheckpointEvery: res.Options.CheckpointEvery,
		Complete: !res.Incomplete, Status: StatusOf(res), Kept: res.Kept,
		WallSeconds: Num(res.Elapsed.Seconds()), Started: started.UTC()}
}

// Run statuses in run.json.
const (
	StatusRunning     = "running"
	StatusInterrupted = "interrupted"
	StatusComplete    = "complete"
	StatusFailed      = "failed"
)

// StatusOf is the status of a finished or stopped result.
func StatusOf(res *sampler.Result) string {
	if res.Incomplete {
		return StatusInterrupted
	}
	return StatusComplete
}

// WriteRun writes data.csv (a copy of the data, for lagstar check),
// draws.csv, run.json and summary.json into dir, each
// through a temporary file and a rename, summary.json last, so that a
// summary.json present in dir always belongs to a fully written run.
func WriteRun(dir string, res *sampler.Result, s *Summary, rec RunRecord) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("create output folder: %w", err)
	}
	// A stale summary from an earlier run must not outlive a failed write.
	if err := os.Remove(filepath.Join(dir, "summary.json")); err != nil && !os.IsNotExist(err) {
		return err
	}
	draws, err := DrawsCSV(res)
	if err != nil {
		return err
	}
	runJSON, err := json.MarshalIndent(rec, "", "  ")
	if err != nil {
		return err
	}
	sum, err := s.JSON()
	if err != nil {
		return err
	}
	for _, f := range []struct {
		name string
		data []byte
	}{{"data.csv", res.Layout.Panel.Raw}, {"draws.csv", draws}, {"run.json", append(runJSON, '\n')}, {"summary.json", sum}} {
		if err := WriteAtomic(filepath.Join(dir, f.name), f.data); err != nil {
			return err
		}
	}
	return nil
}

// BeginRun prepares dir for a fit that is starting: it removes the
// summary and draws of an earlier run there (so nothing in dir can be taken
// for the result of this run before it ends) and writes data.csv and
// run.json, whose status says the fit is running.
func BeginRun(dir string, data []byte, rec RunRecord) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("create output folder: %w", err)
	}
	for _, name := range []string{"summary.json", "draws.csv", "check.json", "report.html"} {
		if err := os.Remove(filepath.Join(dir, name)); err != nil && !os.IsNotExist(err) {
			return err
		}
	}
	if err := WriteAtomic(filepath.Join(dir, "data.csv"), data); err != nil {
		return err
	}
	return WriteRunRecord(dir, rec)
}

// WriteRunRecord writes run.json into dir.
func WriteRunRecord(dir string, rec RunRecord) error {
	runJSON, err := json.MarshalIndent(rec, "", "  ")
	if err != nil {
		return err
	}
	return WriteAtomic(filepath.Join(dir, "run.json"), append(runJSON, '\n'))
}

// WriteAtomic writes data to path through a temporary file in the same
// folder and a rename.
func WriteAtomic(path string, data []byte) error {
	tmp, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return err
	}
	defer os.Remove(tmp.Name())
	if _, err := tmp.Write(data); err != nil {
		tmp.Close()
		return err
	}
	if err := tmp.Close(); err != nil {
		return err
	}
	if err := os.Chmod(tmp.Name(), 0o644); err != nil {
		return err
	}
	return os.Rename(tmp.Name(), path)
}
