package main

import (
	"bytes"
	"errors"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

// TestMain lets a test run the real command (main, with its signal
// handling) in a child process of the test binary.
func TestMain(m *testing.M) {
	if os.Getenv("LAGSTAR_TEST_MAIN") == "1" {
		os.Args = append([]string{"lagstar"}, strings.Fields(os.Getenv("LAGSTAR_TEST_ARGS"))...)
		main()
		return
	}
	os.Exit(m.Run())
}

// TestSIGTERMThenResume sends SIGTERM to a running fit once its first
// checkpoints exist: it exits with status 1 and writes an incomplete run;
// fit --resume then gives the draws of a fit never stopped.
func TestSIGTERMThenResume(t *testing.T) {
	if testing.Short() {
		t.Skip("fits skipped in -short mode")
	}
	dir, mp := setup(t, strings.Replace(goodModel, "draws: 20", "draws: 6000", 1), goodData())
	want := filepath.Join(dir, "whole")
	if code, _, stderr := runCLI("fit", mp, "--out", want, "--quiet"); code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	out := filepath.Join(dir, "cut")
	cmd := exec.Command(os.Args[0], "-test.run=^$")
	cmd.Env = append(os.Environ(), "LAGSTAR_TEST_MAIN=1", "LAGSTAR_TEST_ARGS=fit "+mp+" --out "+out+" --quiet --checkpoint-every 50")
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	deadline := time.Now().Add(60 * time.Second)
	for {
		if _, err := os.Stat(filepath.Join(out, "checkpoints", "chain-2.ckpt")); err == nil {
			break
		}
		if time.Now().After(deadline) {
			cmd.Process.Kill()
			t.Fatal("no checkpoint within 60 s")
		}
		time.Sleep(5 * time.Millisecond)
	}
	if err := cmd.Process.Signal(syscall.SIGTERM); err != nil {
		t.Fatal(err)
	}
	err := cmd.Wait()
	var ee *exec.ExitError
	if !errors.As(err, &ee) || ee.ExitCode() != 1 {
		// The fit may have finished just before the signal on a fast machine.
		t.Fatalf("after SIGTERM: %v, want exit status 1; stderr: %s", err, stderr.String())
	}
	if !strings.Contains(stderr.String(), "--resume "+out) {
		t.Errorf("stderr does not say how to resume:\n%s", stderr.String())
	}
	raw, err := os.ReadFile(filepath.Join(out, "run.json"))
	if err != nil || !strings.Contains(string(raw), `"status": "interrupted"`) {
		t.Fatalf("run.json after SIGTERM (err %v):\n%s", err, raw)
	}
	if code, _, se := runCLI("fit", "--resume", out, "--quiet"); code != 0 {
		t.Fatalf("resume: exit %d: %s", code, se)
	}
	a, _ := os.ReadFile(filepath.Join(want, "draws.csv"))
	b, _ := os.ReadFile(filepath.Join(out, "draws.csv"))
	if len(a) == 0 || !bytes.Equal(a, b) {
		t.Error("draws.csv after SIGTERM and resume differs from the uninterrupted fit")
	}
}
