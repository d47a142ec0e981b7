package main

import (
	"crypto/sha256"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
)

// TestHostileInputs is the red-team table: hostile or absurd inputs, each
// with the exit status and the words of the message it must get, and no
// case may allocate 100 MB or more (runtime.MemStats.TotalAlloc over the
// case, which bounds its peak heap): sizes are refused before anything is
// allocated. A folder of the user's files given as --out is never
// modified. Larger cases (a real 10^9-cell simulate request) are only
// refused by arithmetic, so they are cheap here too.
func TestHostileInputs(t *testing.T) {
	dir, mp := setup(t, goodModel, goodData())
	write := func(name, text string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	base := "data: {csv: data.csv, person: id, occasion: wave}\noutcomes: [{name: pain, type: binary}]\n"
	var bomb strings.Builder
	bomb.WriteString(base + "a: &a [x, x, x, x, x, x, x, x, x]\n")
	for i := 0; i < 8; i++ {
		prev, cur := string(rune('a'+i)), string(rune('b'+i))
		fmt.Fprintf(&bomb, "%s: &%s [*%s, *%s, *%s, *%s, *%s, *%s, *%s, *%s, *%s]\n", cur, cur, prev, prev, prev, prev, prev, prev, prev, prev, prev)
	}
	garbage := make([]byte, 10240)
	for i := range garbage {
		garbage[i] = byte(i * 7)
	}
	user := filepath.Join(dir, "thesis")
	os.MkdirAll(filepath.Join(user, "checkpoints"), 0o755)
	os.WriteFile(filepath.Join(user, "chapter1.tex"), []byte("my thesis"), 0o644)
	os.WriteFile(filepath.Join(user, "report.html"), []byte("my page"), 0o644)
	os.WriteFile(filepath.Join(user, "checkpoints", "notes.txt"), []byte("mine"), 0o644)
	userSum := treeHash(t, user)
	bigCell := write("bigcell.csv", "id,wave,mood,pain\npa,1,"+strings.Repeat("7", 10_000_000)+",1\npa,2,1,0\n")
	grid := write("grid.csv", "id,wave,mood,pain\npa,1,1,0\npa,2,2,1\npb,1000000000,1,1\npb,2,3,0\n")
	huge := write("huge.csv", "id,wave,mood,pain\npa,1,1,-1.797e308\npa,2,2,1\npb,1,1,1\npb,2,3,0\n")
	hugeModel := write("huge.yaml", strings.Replace(goodModel, "type: binary", "type: continuous", 1))
	notFile := write("plain.txt", "not a folder")
	// Two persons over 8,000 occasions with ARMA(1,1) within parts: the
	// moving-average latent block's tables grow with the square of the
	// occasions (about 0.5 GB here, the rest of a 10-draw run a few MB),
	// which the memory estimate must count.
	var longDiary strings.Builder
	longDiary.WriteString("id,wave,pain\n")
	for w := 1; w <= 8000; w++ {
		fmt.Fprintf(&longDiary, "pa,%d,%d\npb,%d,%d\n", w, w%2, w, (w/3)%2)
	}
	write("long.csv", longDiary.String())
	longMA := write("long.yaml", "data: {csv: long.csv, person: id, occasion: wave}\noutcomes: [{name: pain, type: binary}]\ndynamics: {lags: own, moving_average: true}\n")

	cases := []struct {
		name string
		args []string
		code int
		want []string
	}{
		{"draws beyond any machine", []string{"fit", mp, "--draws", "100000000000000000"}, 2, []string{"--draws", "10000000"}},
		{"draws that would exhaust memory", []string{"fit", mp, "--draws", "1000000000000"}, 2, []string{"--draws", "from 1 to 10000000"}},
		{"negative draws", []string{"fit", mp, "--draws", "-5"}, 2, []string{"--draws"}},
		{"too many chains", []string{"fit", mp, "--chains", "100000"}, 2, []string{"--chains", "1 to 64"}},
		{"huge warm-up", []string{"fit", mp, "--warmup", "99999999999"}, 2, []string{"--warmup"}},
		{"memory estimate over the cap", []string{"fit", mp, "--until-converged", "--max-draws", "10000000", "--max-memory", "50MB"}, 2, []string{"would need about", "--max-memory", "--max-draws"}},
		{"in-range sizes beyond this machine's memory", []string{"fit", mp, "--chains", "64", "--draws", "10000000"}, 2, []string{"would need about", "80% of this machine's"}},
		{"ARMA diary whose tables would exhaust memory", []string{"fit", longMA, "--fixed-length", "--chains", "1", "--draws", "10", "--max-memory", "300MB"}, 2, []string{"would need about", "--max-memory"}},
		{"memory cap not a size", []string{"fit", mp, "--max-memory", "lots"}, 2, []string{"--max-memory"}},
		{"1000 categories", []string{"fit", write("cats.yaml", strings.Replace(goodModel, "categories: 3", "categories: 1000", 1))}, 2, []string{"categories: expected a whole number from 2 to 11"}},
		{"10 MB cell", []string{"fit", mp, "--data", bigCell}, 2, []string{"bigcell.csv:2", "at most 65536"}},
		{"grid of 10^9 occasions from four rows", []string{"fit", mp, "--data", grid}, 2, []string{"unevenly spaced", "recode"}},
		{"value a missing-code sentinel", []string{"fit", hugeModel, "--data", huge}, 2, []string{"huge.csv:2", "missing_codes"}},
		{"YAML alias bomb", []string{"fit", write("bomb.yaml", bomb.String())}, 2, []string{"unknown key"}},
		{"deeply nested YAML", []string{"fit", write("nest.yaml", base+"means: "+strings.Repeat("[", 20000)+strings.Repeat("]", 20000)+"\n")}, 2, []string{"not valid YAML"}},
		{"duplicate keys", []string{"fit", write("dup.yaml", goodModel+"means: {over_time: free}\n")}, 2, []string{"given twice"}},
		{"binary garbage as model file", []string{"fit", write("garbage.yaml", string(garbage))}, 2, []string{"garbage.yaml"}},
		{"a folder as model file", []string{"fit", dir}, 2, []string{dir}},
		{"a folder as data", []string{"fit", mp, "--data", dir}, 2, []string{"--data"}},
		{"--out at a file", []string{"fit", mp, "--out", notFile}, 2, []string{"names a file"}},
		{"--out at a folder of the user's files", []string{"fit", mp, "--out", user}, 2, []string{"not a lagstar run", "chapter1.tex"}},
		{"check with absurd replicates", []string{"check", dir, "--draws", "1000000000"}, 2, []string{"--draws"}},
		{"compare with absurd GHK points", []string{"compare", dir, dir, "--ghk-points", "1000000000"}, 2, []string{"--ghk-points"}},
		{"simulate a billion persons", []string{"simulate", mp, "--truth", mp, "--persons", "1000000000", "--out", filepath.Join(dir, "s.csv")}, 2, []string{"--persons"}},
		{"simulate 10^12 cells", []string{"simulate", mp, "--truth", mp, "--persons", "10000000", "--occasions", "100000", "--out", filepath.Join(dir, "s.csv")}, 2, []string{"cells"}},
		{"time limit not a duration", []string{"fit", mp, "--time-limit", "soon"}, 2, []string{"time-limit"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			var before, after runtime.MemStats
			runtime.GC()
			runtime.ReadMemStats(&before)
			args := c.args
			if args[0] == "fit" {
				args = append(args, "--quiet")
			}
			code, _, stderr := runCLI(args...)
			runtime.ReadMemStats(&after)
			if code != c.code {
				t.Errorf("exit %d, want %d; stderr: %.300s", code, c.code, stderr)
			}
			for _, w := range c.want {
				if !strings.Contains(stderr, w) {
					t.Errorf("message lacks %q: %.300s", w, stderr)
				}
			}
			if len(stderr) > 2000 {
				t.Errorf("message of %d characters: quote less", len(stderr))
			}
			if strings.Contains(stderr, "goroutine ") || strings.Contains(stderr, "panic") {
				t.Errorf("a Go trace reached the user: %.300s", stderr)
			}
			if strings.Contains(stderr, "unknown flag") {
				t.Errorf("refused for a flag the command does not have: %.300s", stderr)
			}
			if alloc := after.TotalAlloc - before.TotalAlloc; alloc >= 100<<20 {
				t.Errorf("allocated %d MB before refusing", alloc>>20)
			}
		})
	}
	if treeHash(t, user) != userSum {
		t.Error("the folder of the user's files was modified")
	}
}

// treeHash hashes every file name and content under dir.
func treeHash(t *testing.T, dir string) string {
	h := sha256.New()
	filepath.Walk(dir, func(p string, info os.FileInfo, err error) error {
		if err != nil {
			return err
		}
		fmt.Fprintf(h, "%s\x00", p)
		if !info.IsDir() {
			b, _ := os.ReadFile(p)
			h.Write(b)
		}
		return nil
	})
	return fmt.Sprintf("%x", h.Sum(nil))
}

// TestReadOnlyOutFolder: a fit into a folder it may not write exits with a
// message naming the folder and leaves nothing half-written. Skipped when
// run as root, whom permissions do not stop.
func TestReadOnlyOutFolder(t *testing.T) {
	if os.Geteuid() == 0 {
		t.Skip("permissions do not apply to root")
	}
	dir, mp := setup(t, goodModel, goodData())
	ro := filepath.Join(dir, "ro")
	os.MkdirAll(ro, 0o555)
	defer os.Chmod(ro, 0o755)
	code, _, stderr := runCLI("fit", mp, "--out", filepath.Join(ro, "run"), "--quiet")
	if code == 0 || !strings.Contains(stderr, ro) {
		t.Errorf("exit %d, stderr %q; want a failure naming %s", code, stderr, ro)
	}
	if entries, _ := os.ReadDir(ro); len(entries) != 0 {
		t.Errorf("wrote into the read-only folder: %v", entries)
	}
}
