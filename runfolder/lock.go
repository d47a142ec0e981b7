package runfolder

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/lagstar/lagstar/model"
)

// Lock takes dir's lock for this process and returns its release. The lock
// is an exclusive operating-system lock (flock) on dir/.lagstar.lock, so
// two processes (or two fits in one process) can never hold it at once,
// and a process that dies, however it dies, lets it go. The file holds the
// holder's process id, for the message a second fit gets.
func Lock(dir string) (func(), error) {
	if st, err := os.Stat(dir); err != nil || !st.IsDir() {
		return nil, model.Inputf(dir, 0, "not a run folder (expected the --out folder of lagstar fit)")
	}
	path := filepath.Join(dir, LockFile)
	for range 10 {
		f, err := os.OpenFile(path, os.O_CREATE|os.O_RDWR, 0o644)
		if err != nil {
			return nil, fmt.Errorf("locking %s: %w", dir, err)
		}
		if err := flock(f); err != nil {
			f.Close()
			if !errors.Is(err, errLocked) {
				return nil, fmt.Errorf("locking %s: %w", dir, err)
			}
			raw, _ := os.ReadFile(path)
			who := "another lagstar fit"
			if pid, perr := strconv.Atoi(strings.TrimSpace(string(raw))); perr == nil && pid > 0 {
				who = fmt.Sprintf("another lagstar fit (process %d)", pid)
				return nil, model.Inputf(dir, 0, "is in use by %s; wait for it to finish or stop it (Ctrl-C or kill %d) first", who, pid)
			}
			return nil, model.Inputf(dir, 0, "is in use by %s; wait for it to finish or stop it first", who)
		}
		// The holder before us may have removed the file between our open
		// and our lock: then we hold a lock on a file nobody else sees.
		// Take the lock only on the file the path names.
		held, err1 := f.Stat()
		named, err2 := os.Stat(path)
		if err1 != nil || err2 != nil || !os.SameFile(held, named) {
			f.Close()
			continue
		}
		if err := f.Truncate(0); err == nil {
			fmt.Fprintf(f, "%d\n", os.Getpid())
			f.Sync()
		}
		// Temporary files left by a write that was killed half-way belong
		// to nobody now that we hold the lock.
		for _, pat := range []string{filepath.Join(dir, ".*.tmp*"), filepath.Join(dir, CheckpointDir, ".*.tmp*")} {
			left, _ := filepath.Glob(pat)
			for _, name := range left {
				os.Remove(name)
			}
		}
		return func() {
			os.Remove(path) // before the lock goes, so a waiter re-checks
			f.Close()
		}, nil
	}
	return nil, fmt.Errorf("locking %s: could not take the lock", dir)
}
