package main

import (
	"bufio"
	"debug/elf"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// containerBuildLine returns the shell command of the Containerfile's go
// build (what follows "RUN " on the line that builds ./cmd/gaitrig), so the
// test below builds exactly what the image ships.
func containerBuildLine(t *testing.T) string {
	t.Helper()
	f, err := os.Open(filepath.Join("..", "..", "Containerfile"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		line := strings.TrimSpace(sc.Text())
		if strings.HasPrefix(line, "RUN ") && strings.Contains(line, "go build") && strings.HasSuffix(line, "./cmd/gaitrig") {
			return strings.TrimPrefix(line, "RUN ")
		}
	}
	t.Fatal("Containerfile has no RUN line that builds ./cmd/gaitrig")
	return ""
}

// TestContainerBinaryIsStatic builds the rig the way the Containerfile does
// (its own RUN line: CGO off, trimmed paths) and checks what the image's
// promise rests on: the binary is statically linked (no ELF interpreter,
// no shared libraries), so it runs in an empty ("scratch") image, and it
// runs a lockstep scenario with an empty environment and no network
// configuration at all. Building the image itself needs a container engine
// and the golang base image from a registry; TestContainerImageBuilds does
// that where one is reachable.
func TestContainerBinaryIsStatic(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the binary; not in -short")
	}
	line := containerBuildLine(t)
	const imagePath = "-o /out/gaitrig "
	if !strings.Contains(line, imagePath) {
		t.Fatalf("the Containerfile's build line no longer writes %q: %s", imagePath, line)
	}
	out := filepath.Join(t.TempDir(), "gaitrig")
	line = strings.Replace(line, imagePath, "-o '"+out+"' ", 1)
	cmd := exec.Command("sh", "-c", line)
	cmd.Dir = filepath.Join("..", "..")
	cmd.Env = append(os.Environ(), "VERSION=container-test")
	if b, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("%s: %v\n%s", line, err, b)
	}
	ef, err := elf.Open(out)
	if err != nil {
		t.Fatal(err)
	}
	defer ef.Close()
	for _, p := range ef.Progs {
		if p.Type == elf.PT_INTERP {
			t.Error("the binary asks for an ELF interpreter: it is dynamically linked and would not run in a scratch image")
		}
	}
	if libs, err := ef.ImportedLibraries(); err == nil && len(libs) > 0 {
		t.Errorf("the binary needs shared libraries %v", libs)
	}
	run := exec.Command(out, "run", "--json", "--dir", t.TempDir(), "level-demo")
	run.Env = []string{} // nothing from the host: no PATH, HOME, proxies
	b, err := run.Output()
	if err != nil {
		t.Fatalf("the static binary in an empty environment: %v\n%s", err, b)
	}
	if !strings.Contains(string(b), `"outcome": "pass"`) {
		t.Errorf("run --json printed no passing outcome:\n%s", b)
	}
}

// TestContainerImageBuilds builds the image with Docker or Podman when one
// of them can reach its engine and GAITRIG_CONTAINER_BUILD=1 asks for it
// (the build pulls the golang base image, which needs a registry).
func TestContainerImageBuilds(t *testing.T) {
	if os.Getenv("GAITRIG_CONTAINER_BUILD") != "1" {
		t.Skip("set GAITRIG_CONTAINER_BUILD=1 on a host with Docker or Podman and registry access")
	}
	var engine string
	for _, e := range []string{"podman", "docker"} {
		if _, err := exec.LookPath(e); err == nil && exec.Command(e, "info").Run() == nil {
			engine = e
			break
		}
	}
	if engine == "" {
		t.Fatal("GAITRIG_CONTAINER_BUILD=1 but neither podman nor docker reaches an engine")
	}
	tag := "gaitrig-test:latest"
	b, err := exec.Command(engine, "build", "-f", filepath.Join("..", "..", "Containerfile"), "-t", tag, filepath.Join("..", "..")).CombinedOutput()
	if err != nil {
		t.Fatalf("%s build: %v\n%s", engine, err, b)
	}
	defer exec.Command(engine, "rmi", tag).Run()
	b, err = exec.Command(engine, "run", "--rm", "--network", "none", tag, "scenarios").CombinedOutput()
	if err != nil || !strings.Contains(string(b), "level-demo") {
		t.Fatalf("%s run --network none %s scenarios: %v\n%s", engine, tag, err, b)
	}
}
