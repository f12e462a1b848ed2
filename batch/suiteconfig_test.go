package batch

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gaitrig/rig"
)

func TestReadSuiteConfig(t *testing.T) {
	known := []string{"level-demo", "slope-change"}
	write := func(text string) string {
		dir := t.TempDir()
		if err := os.WriteFile(filepath.Join(dir, SuiteConfigFile), []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
		return dir
	}
	cfg, err := ReadSuiteConfig(t.TempDir(), known)
	if err != nil || len(cfg.Quarantine) != 0 || cfg.Path != "" {
		t.Errorf("a folder without suite.yaml: %+v, %v", cfg, err)
	}
	cfg, err = ReadSuiteConfig(write("# known trouble\nquarantine:\n  - slope-change   # fix under way\n"), known)
	if err != nil || !cfg.Quarantine["slope-change"] || len(cfg.Quarantine) != 1 {
		t.Errorf("one quarantined name: %+v, %v", cfg, err)
	}
	cfg, err = ReadSuiteConfig(write("quarantine: [level-demo, slope-change]\n"), known)
	if err != nil || len(cfg.Quarantine) != 2 {
		t.Errorf("flow list: %+v, %v", cfg, err)
	}
	for _, c := range []struct{ text, want string }{
		{"quarantine:\n  - level-demo\n  - slope-chnage\n", "suite.yaml:3: quarantine[1]: \"slope-chnage\" is not a scenario of this suite"},
		{"\nquarantaine: [level-demo]\n", "suite.yaml:2: quarantaine: unknown field"},
		{"quarantine: level-demo\n", "suite.yaml:1: quarantine: want a list of scenario names"},
		{"quarantine:\n  - [a, b]\n", "suite.yaml:2: quarantine[0]: want a scenario name"},
		{"- level-demo\n", "want a mapping with the field quarantine"},
		{"quarantine: [\n", "not valid YAML"},
		{strings.Repeat("#", 2<<20), "more than the"},
	} {
		_, err := ReadSuiteConfig(write(c.text), known)
		if !errors.Is(err, rig.ErrConfig) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%q: error %v, want one containing %q", c.text[:min(len(c.text), 40)], err, c.want)
		}
	}
}
