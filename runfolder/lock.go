package runfolder

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"

	"github.com/lagstar/lagstar/model"
)

// Lock takes dir's lock for this process and returns its release. A
// lock left by a process that no longer runs (killed without warning) is
// taken over.
func Lock(dir string) (func(), error) {
	path := filepath.Join(dir, LockFile)
	for range 3 {
		f, err := os.OpenFile(path, os.O_CREATE|os.O_EXCL|os.O_WRONLY, 0o644)
		if err == nil {
			fmt.Fprintf(f, "%d\n", os.Getpid())
			if err := f.Close(); err != nil {
				return nil, err
			}
			return func() { os.Remove(path) }, nil
		}
		if !errors.Is(err, os.ErrExist) {
			return nil, fmt.Errorf("locking %s: %w", dir, err)
		}
		raw, _ := os.ReadFile(path)
		pid, perr := strconv.Atoi(strings.TrimSpace(string(raw)))
		if perr == nil && pid > 0 && pid != os.Getpid() && running(pid) {
			return nil, model.Inputf(dir, 0, "is in use by another lagstar fit (process %d); wait for it to finish or stop it (Ctrl-C or kill %d) first", pid, pid)
		}
		// Stale: the process that held it is gone.
		os.Remove(path)
	}
	return nil, fmt.Errorf("locking %s: could not take the lock", dir)
}

// running reports whether a process with this id exists.
func running(pid int) bool {
	p, err := os.FindProcess(pid)
	if err != nil {
		return false
	}
	err = p.Signal(syscall.Signal(0))
	return err == nil || errors.Is(err, syscall.EPERM)
}
