package lagstar_test

import (
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"github.com/lagstar/lagstar/model"
)

// TestREADMEModelFiles: the model files and the truth file shown in
// README.md are read by the parser as they stand, so the documented keys
// cannot drift from the ones lagstar accepts.
func TestREADMEModelFiles(t *testing.T) {
	raw, err := os.ReadFile("README.md")
	if err != nil {
		t.Fatal(err)
	}
	blocks := regexp.MustCompile("(?s)```yaml\n(.*?)```").FindAllStringSubmatch(string(raw), -1)
	var reference *model.Spec
	models, truths := 0, 0
	for _, b := range blocks {
		text := b[1]
		switch {
		case strings.HasPrefix(text, "data:") && strings.Contains(text, "\noutcomes:"):
			sp, err := model.ParseSpec("README.md", []byte(text))
			if err != nil {
				t.Errorf("README model file does not parse: %v\n%s", err, text)
				continue
			}
			if reference == nil && strings.Contains(text, "person_differences:") {
				reference = sp
			}
			models++
		case strings.HasPrefix(text, "thresholds:"):
			truths++
			if reference == nil {
				t.Fatal("the truth-file example comes before the reference model file")
			}
			path := filepath.Join(t.TempDir(), "truth.yaml")
			os.WriteFile(path, []byte(text), 0o644)
			if _, err := model.ReadTruth(path, reference); err != nil {
				t.Errorf("README truth file does not read against the reference model: %v", err)
			}
		}
	}
	if models == 0 || truths == 0 || reference == nil {
		t.Errorf("README: %d model files (reference found: %v), %d truth files; want the reference model and a truth file", models, reference != nil, truths)
	}
	for _, old := range []string{"\nbetween:", "\nwithin:", "  file: ", "  missing: ["} {
		if strings.Contains(string(raw), old) {
			t.Errorf("README still shows the old model-file key %q", strings.TrimSpace(old))
		}
	}
}
