package main

import (
	"bytes"
	"math"
	"strings"
	"testing"

	"gaitrig/rig"
)

// cycle prints the kneed figures for a walker with knees, and only then.
func TestPrintCycleKneeFigures(t *testing.T) {
	r := rig.GaitReport{Scenario: "kneed", Loop: "passive", Found: true, Stable: true,
		Knees: true, KneeStrikeEnergyLostJ: 0.2922, MinStanceKneeTorqueNM: -5.411, KneeStrikeImpulseRatio: 0.4528}
	var b bytes.Buffer
	printCycle(&b, r, nil)
	if !strings.Contains(b.String(), "energy lost at knee strike 0.2922 J per step, impulse ratio |Λt|/Λn 0.4528; minimum stance knee-lock torque -5.411 N·m") {
		t.Errorf("kneed walker: no knee figures in\n%s", b.String())
	}
	r.Knees, r.KneeStrikeEnergyLostJ, r.MinStanceKneeTorqueNM, r.KneeStrikeImpulseRatio = false, math.NaN(), math.NaN(), math.NaN()
	b.Reset()
	printCycle(&b, r, nil)
	if strings.Contains(b.String(), "knee strike") || strings.Contains(b.String(), "knee-lock") {
		t.Errorf("walker without knees: knee figures printed\n%s", b.String())
	}
}
