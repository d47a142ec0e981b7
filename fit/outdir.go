package fit

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
)

// runFiles are the files lagstar writes into a run folder (fit, check,
// report); runPatterns are the patterns of its figures. Only these are
// removed when a run is overwritten: a file of the user's that happens to
// sit in the folder is left alone.
var (
	runFiles    = []string{"summary.json", "draws.csv", "run.json", "data.csv", "check.json", "report.html"}
	runPatterns = []string{"check_*.png", ".*.tmp*"}
)

// runState is what an output folder holds.
type runState int

const (
	noRun      runState = iota // missing or empty folder
	finished                   // a complete or failed lagstar run
	unfinished                 // a lagstar run that is running or interrupted
)

// inspectOut classifies the output folder dir before anything is written
// there. A path that is a file, and a folder that holds files but no
// lagstar run, are refused (nothing in them is touched).
func inspectOut(dir string) (runState, *report.RunRecord, error) {
	st, err := os.Stat(dir)
	if errors.Is(err, os.ErrNotExist) {
		return noRun, nil, nil
	}
	if err != nil {
		return noRun, nil, fmt.Errorf("output folder %s: %w", dir, err)
	}
	if !st.IsDir() {
		return noRun, nil, model.Inputf(dir, 0, "--out names a file, not a folder; give a new or empty folder for the run")
	}
	entries, err := os.ReadDir(dir)
	if err != nil {
		return noRun, nil, fmt.Errorf("output folder %s: %w", dir, err)
	}
	entries = slices.DeleteFunc(entries, func(e os.DirEntry) bool { return e.Name() == lockFile })
	if len(entries) == 0 {
		return noRun, nil, nil
	}
	raw, err := os.ReadFile(filepath.Join(dir, "run.json"))
	var rec report.RunRecord
	if err != nil || json.Unmarshal(raw, &rec) != nil || rec.Program != report.Program {
		names := make([]string, 0, len(entries))
		for _, e := range entries {
			names = append(names, e.Name())
		}
		slices.Sort(names)
		if len(names) > 4 {
			names = append(names[:4], fmt.Sprintf("and %d more", len(entries)-4))
		}
		return noRun, nil, model.Inputf(dir, 0, "holds files that are not a lagstar run (%s); lagstar writes only into a new or empty folder or over an earlier lagstar run: choose another --out folder", strings.Join(names, ", "))
	}
	if rec.Status == report.StatusRunning || rec.Status == report.StatusInterrupted {
		return unfinished, &rec, nil
	}
	return finished, &rec, nil
}

// clearRun removes every file of the lagstar run in dir (its results,
// figures, data copy and checkpoints), leaving other files alone.
func clearRun(dir string) error {
	var names []string
	for _, n := range runFiles {
		names = append(names, filepath.Join(dir, n))
	}
	for _, pat := range runPatterns {
		m, err := filepath.Glob(filepath.Join(dir, pat))
		if err != nil {
			return err
		}
		names = append(names, m...)
	}
	ck, _ := filepath.Glob(filepath.Join(dir, checkpointDir, "chain-*.ckpt"))
	names = append(names, ck...)
	tmp, _ := filepath.Glob(filepath.Join(dir, checkpointDir, ".*.tmp*"))
	names = append(names, tmp...)
	for _, n := range names {
		if err := os.Remove(n); err != nil && !errors.Is(err, os.ErrNotExist) {
			return err
		}
	}
	// The checkpoint folder goes too when nothing else is in it.
	if entries, err := os.ReadDir(filepath.Join(dir, checkpointDir)); err == nil && len(entries) == 0 {
		return os.Remove(filepath.Join(dir, checkpointDir))
	}
	return nil
}
