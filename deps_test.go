package lagstar_test

import (
	"os/exec"
	"strings"
	"testing"
)

// TestDependencyDirection enforces the package layering of DEVELOPERS.md
// with `go list -deps`.
func TestDependencyDirection(t *testing.T) {
	const mod = "github.com/lagstar/lagstar/"
	forbidden := map[string][]string{
		"latentresp":     {"model", "priors", "sampler", "diagnostics", "report", "fit", "cmd"},
		"diagnostics":    {"model", "priors", "sampler", "latentresp", "report", "fit", "cmd"},
		"priors":         {"model", "sampler", "diagnostics", "report", "fit", "cmd"},
		"model":          {"sampler", "priors", "latentresp", "diagnostics", "report", "fit", "cmd"},
		"sampler":        {"report", "fit", "cmd", "diagnostics", "runfolder"},
		"report":         {"fit", "cmd", "check", "runfolder"},
		"runfolder":      {"fit", "cmd", "check", "compare", "validate"},
		"check":          {"fit", "cmd", "report", "validate", "compare", "runfolder"},
		"compare":        {"fit", "cmd", "report", "validate", "check", "runfolder"},
		"internal/dense": {"model", "sampler", "priors", "report", "fit"},
		"internal/bvn":   {"model", "sampler", "priors", "report", "fit", "catalog", "internal/dense"},
		"catalog":        {"model", "sampler", "priors", "latentresp", "diagnostics", "report", "check", "compare", "validate", "fit", "cmd", "internal"},
	}
	for pkg, bad := range forbidden {
		out, err := exec.Command("go", "list", "-deps", "./"+pkg).Output()
		if err != nil {
			t.Fatalf("go list %s: %v", pkg, err)
		}
		deps := strings.Fields(string(out))
		for _, d := range deps {
			for _, b := range bad {
				if strings.HasPrefix(d, mod+b) {
					t.Errorf("%s imports %s, against the layering", pkg, d)
				}
			}
			if pkg != "cmd" && (strings.Contains(d, "spf13/cobra") || strings.Contains(d, "progressbar")) {
				t.Errorf("%s imports %s; only cmd may", pkg, d)
			}
		}
	}
}
