package model

import (
	"errors"
	"os"
	"path/filepath"
)

// ReadRunFile reads the file name from a fit's output folder dir,
// reporting a missing folder or file as an InputError that says what
// was expected.
func ReadRunFile(dir, name string) ([]byte, error) {
	st, err := os.Stat(dir)
	if err != nil || !st.IsDir() {
		return nil, Inputf(dir, 0, "not a run folder (expected the --out folder of lagstar fit)")
	}
	path := filepath.Join(dir, name)
	raw, err := os.ReadFile(path)
	if errors.Is(err, os.ErrNotExist) {
		return nil, Inputf(path, 0, "missing: %s has no %s; was the fit finished?", dir, name)
	}
	if err != nil {
		return nil, Inputf(path, 0, "cannot read: %v", err)
	}
	return raw, nil
}
