package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// TestBashCompletionCompletes loads the generated script into a real bash
// and asks it to complete, as the shell does on TAB: a command, a flag of
// that command (read from its help), and a built-in scenario name.
func TestBashCompletionCompletes(t *testing.T) {
	bash, err := exec.LookPath("bash")
	if err != nil {
		if os.Getenv("GAITRIG_REQUIRE_TOOLS") == "1" {
			t.Fatal("bash not found")
		}
		t.Skip("bash not found")
	}
	code, script, _ := run(t, "completion", "bash")
	if code != exitPass {
		t.Fatalf("completion bash: exit %d", code)
	}
	file := filepath.Join(t.TempDir(), "gaitrig.bash")
	if err := os.WriteFile(file, []byte(script), 0o644); err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		words []string
		want  string
	}{
		{[]string{"gaitrig", "ru"}, "run"},
		{[]string{"gaitrig", "run", "--li"}, "--link"},
		{[]string{"gaitrig", "suite", "--junit-"}, "--junit-file"},
		{[]string{"gaitrig", "cycle", "slope-c"}, "slope-change"},
		{[]string{"gaitrig", "preflight", "--scenario", "push"}, "push-recovery"},
	}
	for _, tt := range tests {
		words := "'" + strings.Join(tt.words, "' '") + "'"
		cmd := exec.Command(bash, "--norc", "--noprofile", "-c",
			"source "+file+"; COMP_WORDS=("+words+"); COMP_CWORD="+itoa(len(tt.words)-1)+"; _gaitrig; echo \"${COMPREPLY[*]}\"")
		out, err := cmd.CombinedOutput()
		if err != nil {
			t.Fatalf("bash: %v\n%s", err, out)
		}
		if got := strings.TrimSpace(string(out)); got != tt.want {
			t.Errorf("completing %v: %q, want %q", tt.words, got, tt.want)
		}
	}
	if code, _, errOut := run(t, "completion", "zsh"); code != exitConfig || !strings.Contains(errOut, "bash") {
		t.Errorf("completion zsh: exit %d, %q; want a usage error naming bash", code, errOut)
	}
}

func itoa(n int) string { return strconv.Itoa(n) }
