//go:build !unix

package runfolder

import (
	"errors"
	"os"
)

var errLocked = errors.New("locked")

// flock is a no-op where the operating system has no flock: the run
// folder is then not protected against a second fit (documented in
// DEVELOPERS.md).
func flock(*os.File) error { return nil }
