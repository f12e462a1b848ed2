package batch

import (
	"context"
	"strings"
	"testing"

	"gaitrig/scenarios"
)

// TestGateSaysNoGoForTheWeakerFirmware sets a lab minimum of 2.5 for the
// friction ratio (the nominal reference law walks down to about 0.36 μ_s,
// a ratio of 2.8; with less swing damping to about 0.42 μ_s, 2.4 — since
// heel-strike impulses count in the friction demand): the gate
// must say GO for the nominal firmware and NO-GO for the weaker one,
// naming the friction margin.
func TestGateSaysNoGoForTheWeakerFirmware(t *testing.T) {
	if testing.Short() {
		t.Skip("lockstep walks")
	}
	base, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	nominal, err := Derive(base, "demo-gated", "a lab minimum friction ratio of 2.5", func(s *scenarios.Scenario) {
		s.Margins.MinFrictionRatio = 2.5
	})
	if err != nil {
		t.Fatal(err)
	}
	weak, err := Derive(nominal, "demo-gated-weak", "swing-leg damping lowered from 10 to 3", func(s *scenarios.Scenario) {
		s.Controller.Settings = map[string]float64{"swing_kd": 3}
	})
	if err != nil {
		t.Fatal(err)
	}
	if got := GatedAxes(nominal); len(got) != 1 || got[0] != "friction" {
		t.Fatalf("gated axes %v, want [friction]", got)
	}
	g, err := Gate{Dir: t.TempDir(), Jobs: 2}.Run(context.Background(), nominal)
	if err != nil {
		t.Fatal(err)
	}
	if !g.Go || g.Stability == nil || len(g.Margins) != 1 {
		t.Fatalf("nominal: GO %v, failures %v", g.Go, g.Failures)
	}
	w, err := Gate{Dir: t.TempDir(), Jobs: 2}.Run(context.Background(), weak)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("weak: %v", w.Failures)
	if w.Go || len(w.Failures) != 1 || !strings.Contains(w.Failures[0], "margin friction") || !strings.Contains(w.Failures[0], "short of the required") {
		t.Errorf("weak firmware: GO %v, failures %v: want NO-GO naming the friction margin", w.Go, w.Failures)
	}
	// The gate's stability bound bites: an impossible bound fails a stable gait.
	strict, err := Derive(base, "demo-strict", "spectral radius bound 0.1", func(s *scenarios.Scenario) { s.Margins.MaxSpectralRadius = 0.1 })
	if err != nil {
		t.Fatal(err)
	}
	sg, err := Gate{Dir: t.TempDir()}.Run(context.Background(), strict)
	if err != nil {
		t.Fatal(err)
	}
	if sg.Go || len(sg.Failures) != 1 || !strings.Contains(sg.Failures[0], "spectral radius") {
		t.Errorf("strict bound: GO %v, failures %v", sg.Go, sg.Failures)
	}
}
