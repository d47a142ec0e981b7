package main

import (
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"
)

// TestHTMLReportRendersInChromium fits, checks and reports a small panel,
// then loads report.html in headless Chromium (Debian's chromium package;
// .ci/run installs it) and requires every figure to have loaded.
func TestHTMLReportRendersInChromium(t *testing.T) {
	dir, mp := setup(t, goodModel, goodData())
	out := filepath.Join(dir, "run")
	for _, args := range [][]string{{"fit", mp, "--out", out, "--quiet"}, {"check", out, "--draws", "50"}, {"report", out}} {
		if code, _, stderr := runCLI(args...); code != 0 {
			t.Fatalf("%v: exit %d: %s", args, code, stderr)
		}
	}
	page := filepath.Join(out, "report.html")
	raw, err := os.ReadFile(page)
	if err != nil {
		t.Fatal(err)
	}
	html := string(raw)
	for _, want := range []string{"Estimates", "Trace plots", "Posterior predictive checks", "not proof of causation", "icc[mood]"} {
		if !strings.Contains(html, want) {
			t.Errorf("report.html lacks %q", want)
		}
	}
	if strings.Contains(html, "http://") || strings.Contains(html, "https://") {
		t.Error("report.html refers to the network; it must be self-contained")
	}
	browser, err := exec.LookPath("chromium")
	if err != nil {
		t.Skip("chromium not installed (.ci/run installs Debian's chromium package)")
	}
	ctx, cancel := context.WithTimeout(context.Background(), 90*time.Second)
	defer cancel()
	cmd := exec.CommandContext(ctx, browser, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
		"--disable-background-networking", "--disable-component-update", "--disable-sync", "--user-data-dir="+t.TempDir(),
		"--virtual-time-budget=5000", "--dump-dom", "file://"+page)
	dom, err := cmd.Output()
	if err != nil {
		t.Fatalf("chromium: %v", err)
	}
	m := regexp.MustCompile(`data-figures-loaded="(\d+)"`).FindSubmatch(dom)
	if m == nil {
		t.Fatalf("the page's load script did not run; body: %.200s", dom)
	}
	if want := strings.Count(html, `class="figure"`); string(m[1]) != strconv.Itoa(want) {
		t.Errorf("%s of %d figures loaded in Chromium", m[1], want)
	}
}
