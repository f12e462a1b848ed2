//go:build unix

package record

import (
	"os"
	"path/filepath"
	"syscall"
	"testing"
)

// TestEveryRunFolderFileHasOneMode writes a run folder with every file the
// record package makes (manifest, telemetry, events, steps, summary,
// Parquet) and requires each to be FileMode, so a CI artifact uploader
// running as another user can read all of them. The temporary files behind
// manifest.json, summary.json and the Parquet export were 0600 before.
func TestEveryRunFolderFileHasOneMode(t *testing.T) {
	// The process umask would take bits off an os.OpenFile'd file; clear it
	// for the test so what is checked is the mode the code asks for.
	old := syscall.Umask(0o022)
	defer syscall.Umask(old)
	dir := filepath.Join(t.TempDir(), "run")
	w, err := Create(dir, testManifest())
	if err != nil {
		t.Fatal(err)
	}
	tk := Tick{Index: 0}
	w.Tick(&tk)
	if err := w.Close(Summary{Outcome: Pass}); err != nil {
		t.Fatal(err)
	}
	if _, err := ExportParquet(dir); err != nil {
		t.Fatal(err)
	}
	want := []string{ManifestFile, TelemetryFile, EventsFile, StepsFile, SummaryFile, ParquetFile}
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	if len(entries) != len(want) {
		t.Errorf("run folder holds %d entries, want %d (%v)", len(entries), len(want), want)
	}
	for _, name := range want {
		fi, err := os.Stat(filepath.Join(dir, name))
		if err != nil {
			t.Error(err)
			continue
		}
		if got := fi.Mode().Perm(); got != FileMode {
			t.Errorf("%s: mode %#o, want %#o", name, got, FileMode)
		}
	}
}
