// Package runfolder owns a fit's output folder: the names and layout of
// its files, its lock, its run record (run.json) and the reading and
// writing of everything in it. fit, resume, check, compare and report
// reach the folder only through it.
//
//	RUN_DIR/
//	  run.json        the run record (Record), written first and on every change of status
//	  data.csv        a copy of the data (check, compare and resume read it)
//	  draws.csv       kept draws (report.DrawsCSV)
//	  summary.json    the summary (report.Summary), written before run.json says complete
//	  check.json, check_KIND[_n].png   posterior predictive checks (lagstar check)
//	  report.html     the HTML report (lagstar report)
//	  checkpoints/chain-N.ckpt          while the run is unfinished
//	  .lagstar.lock   while a fit or resume writes
package runfolder

import (
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"github.com/lagstar/lagstar/model"
	"github.com/lagstar/lagstar/report"
	"github.com/lagstar/lagstar/sampler"
)

// The files of a run folder.
const (
	RunFile       = "run.json"
	DataFile      = "data.csv"
	DrawsFile     = "draws.csv"
	SummaryFile   = "summary.json"
	CheckFile     = "check.json"
	ReportFile    = "report.html"
	CheckpointDir = "checkpoints"
	// LockFile marks a run folder as in use by a fit or a resume, so that
	// a second one started on the same folder (a resume typed while the
	// first still runs) cannot interleave its writes with the first's.
	LockFile = ".lagstar.lock"
)

// files are the files lagstar writes into a run folder (fit, check,
// report); patterns are the patterns of its figures and temporary files.
// Only these are removed when a run is overwritten: a file of the user's
// that happens to sit in the folder is left alone. A new file written
// into run folders must be added here.
var (
	files    = []string{SummaryFile, DrawsFile, RunFile, DataFile, CheckFile, ReportFile}
	patterns = []string{"check_*.png", ".*.tmp*"}
)

// Path returns the path of file name in run folder dir.
func Path(dir, name string) string { return filepath.Join(dir, name) }

// CheckFigure is the file name of page (from 1) of the figure of the
// checked statistics of one kind.
func CheckFigure(kind string, page int) string {
	if page <= 1 {
		return "check_" + kind + ".png"
	}
	return fmt.Sprintf("check_%s_%d.png", kind, page)
}

// CheckpointFile is chain's (from 0) checkpoint file in dir.
func CheckpointFile(dir string, chain int) string {
	return filepath.Join(dir, CheckpointDir, fmt.Sprintf("chain-%d.ckpt", chain+1))
}

// State is what an output folder holds.
type State int

// The states of an output folder.
const (
	NoRun      State = iota // missing or empty folder
	Finished                // a complete or failed lagstar run
	Unfinished              // a lagstar run that is running or interrupted
)

// Inspect classifies the output folder dir before anything is written
// there. A path that is a file, and a folder that holds files but no
// lagstar run, are refused (nothing in them is touched).
func Inspect(dir string) (State, *Record, error) {
	st, err := os.Stat(dir)
	if errors.Is(err, os.ErrNotExist) {
		return NoRun, nil, nil
	}
	if err != nil {
		return NoRun, nil, fmt.Errorf("output folder %s: %w", dir, err)
	}
	if !st.IsDir() {
		return NoRun, nil, model.Inputf(dir, 0, "--out names a file, not a folder; give a new or empty folder for the run")
	}
	entries, err := os.ReadDir(dir)
	if err != nil {
		return NoRun, nil, fmt.Errorf("output folder %s: %w", dir, err)
	}
	entries = slices.DeleteFunc(entries, func(e os.DirEntry) bool { return e.Name() == LockFile })
	if len(entries) == 0 {
		return NoRun, nil, nil
	}
	raw, err := os.ReadFile(Path(dir, RunFile))
	var rec Record
	if err != nil || json.Unmarshal(raw, &rec) != nil || rec.Program != report.Program {
		names := make([]string, 0, len(entries))
		for _, e := range entries {
			names = append(names, e.Name())
		}
		slices.Sort(names)
		if len(names) > 4 {
			names = append(names[:4], fmt.Sprintf("and %d more", len(entries)-4))
		}
		return NoRun, nil, model.Inputf(dir, 0, "holds files that are not a lagstar run (%s); lagstar writes only into a new or empty folder or over an earlier lagstar run: choose another --out folder", strings.Join(names, ", "))
	}
	if rec.Unfinished() {
		return Unfinished, &rec, nil
	}
	return Finished, &rec, nil
}

// Clear removes every file of the lagstar run in dir (its results,
// figures, data copy and checkpoints), leaving other files alone.
func Clear(dir string) error {
	var names []string
	for _, n := range files {
		names = append(names, Path(dir, n))
	}
	for _, pat := range patterns {
		m, err := filepath.Glob(filepath.Join(dir, pat))
		if err != nil {
			return err
		}
		names = append(names, m...)
	}
	ck, _ := filepath.Glob(filepath.Join(dir, CheckpointDir, "chain-*.ckpt"))
	names = append(names, ck...)
	tmp, _ := filepath.Glob(filepath.Join(dir, CheckpointDir, ".*.tmp*"))
	names = append(names, tmp...)
	for _, n := range names {
		if err := os.Remove(n); err != nil && !errors.Is(err, os.ErrNotExist) {
			return err
		}
	}
	// The checkpoint folder goes too when nothing else is in it.
	if entries, err := os.ReadDir(filepath.Join(dir, CheckpointDir)); err == nil && len(entries) == 0 {
		return os.Remove(filepath.Join(dir, CheckpointDir))
	}
	return nil
}

// Begin prepares dir for a fit that is starting: it removes the summary
// and draws of an earlier run there (so nothing in dir can be taken for
// the result of this run before it ends) and writes data.csv and run.json,
// whose status says the fit is running.
func Begin(dir string, data []byte, rec Record) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("create output folder: %w", err)
	}
	for _, name := range []string{SummaryFile, DrawsFile, CheckFile, ReportFile} {
		if err := os.Remove(Path(dir, name)); err != nil && !os.IsNotExist(err) {
			return err
		}
	}
	if err := WriteAtomic(Path(dir, DataFile), data); err != nil {
		return err
	}
	return WriteRecord(dir, rec)
}

// WriteResult writes data.csv (a copy of the data, for lagstar check),
// draws.csv, summary.json and run.json into dir, each through a temporary
// file, fsync and a rename, run.json last: a run.json that says complete
// always belongs to a fully written run, and a run stopped while writing
// is still unfinished (and can be resumed).
func WriteResult(dir string, res *sampler.Result, s *report.Summary, rec Record) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("create output folder: %w", err)
	}
	// A stale summary from an earlier run must not outlive a failed write.
	if err := os.Remove(Path(dir, SummaryFile)); err != nil && !os.IsNotExist(err) {
		return err
	}
	draws, err := report.DrawsCSV(res)
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
	// run.json last: its status says complete only once everything it
	// vouches for is on disk (a kill before leaves a run to resume).
	for _, f := range []struct {
		name string
		data []byte
	}{{DataFile, res.Layout.Panel.Raw}, {DrawsFile, draws}, {SummaryFile, sum}, {RunFile, append(runJSON, '\n')}} {
		if err := WriteAtomic(Path(dir, f.name), f.data); err != nil {
			return err
		}
	}
	return nil
}

// WriteRecord writes run.json into dir.
func WriteRecord(dir string, rec Record) error {
	runJSON, err := json.MarshalIndent(rec, "", "  ")
	if err != nil {
		return err
	}
	return WriteAtomic(Path(dir, RunFile), append(runJSON, '\n'))
}

// WriteFile writes file name of run folder dir atomically.
func WriteFile(dir, name string, data []byte) error { return WriteAtomic(Path(dir, name), data) }

// PrepareCheckpoints makes dir's checkpoint folder and returns the
// function that writes chain checkpoints there, each atomically (for
// sampler.Options.Checkpoint).
func PrepareCheckpoints(dir string) (func(chain int, data []byte) error, error) {
	if err := os.MkdirAll(filepath.Join(dir, CheckpointDir), 0o755); err != nil {
		return nil, err
	}
	return func(chain int, data []byte) error { return WriteAtomic(CheckpointFile(dir, chain), data) }, nil
}

// ReadCheckpoints reads each chain's checkpoint (nil for a chain that has
// none: it was stopped before its first).
func ReadCheckpoints(dir string, chains int) ([][]byte, error) {
	cps := make([][]byte, chains)
	for c := range cps {
		b, err := os.ReadFile(CheckpointFile(dir, c))
		switch {
		case errors.Is(err, os.ErrNotExist):
		case err != nil:
			return nil, model.Inputf(CheckpointFile(dir, c), 0, "cannot read: %v", err)
		default:
			cps[c] = b
		}
	}
	return cps, nil
}

// RemoveCheckpoints removes dir's checkpoint folder (the run is complete,
// or failed and cannot be resumed).
func RemoveCheckpoints(dir string) error { return os.RemoveAll(filepath.Join(dir, CheckpointDir)) }

// Read reads file name from run folder dir, reporting a missing folder or
// file as an InputError that says what was expected.
func Read(dir, name string) ([]byte, error) {
	st, err := os.Stat(dir)
	if err != nil || !st.IsDir() {
		return nil, model.Inputf(dir, 0, "not a run folder (expected the --out folder of lagstar fit)")
	}
	path := Path(dir, name)
	raw, err := os.ReadFile(path)
	if errors.Is(err, os.ErrNotExist) {
		return nil, model.Inputf(path, 0, "missing: %s has no %s; was the fit finished?", dir, name)
	}
	if err != nil {
		return nil, model.Inputf(path, 0, "cannot read: %v", err)
	}
	return raw, nil
}

// ReadSummary reads and decodes dir's summary.json.
func ReadSummary(dir string) (*report.Summary, error) {
	raw, err := Read(dir, SummaryFile)
	if err != nil {
		return nil, err
	}
	s, err := report.ParseSummary(raw)
	if err != nil {
		return nil, model.Inputf(dir, 0, "%v", err)
	}
	return s, nil
}

// WriteAtomic writes data to path through a temporary file in the same
// folder, fsync and a rename (then an fsync of the folder): after a crash
// path holds the old content or the new, never a part.
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
	if err := tmp.Sync(); err != nil {
		tmp.Close()
		return err
	}
	if err := tmp.Close(); err != nil {
		return err
	}
	if err := os.Chmod(tmp.Name(), 0o644); err != nil {
		return err
	}
	if err := os.Rename(tmp.Name(), path); err != nil {
		return err
	}
	// The rename itself reaches the disk with the folder's entry.
	if d, err := os.Open(filepath.Dir(path)); err == nil {
		d.Sync()
		d.Close()
	}
	return nil
}
