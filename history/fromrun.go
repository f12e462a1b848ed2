package history

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"math"
	"os"
	"strings"

	"gaitrig/batch"
	"gaitrig/record"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// FromRun makes the stored result of one run: command is the command that
// ran it (run, suite), revision the firmware revision given by flag or
// GAITRIG_FIRMWARE_REVISION.
func FromRun(command string, sc *scenarios.Scenario, res rig.Result, revision string) Result {
	sum := sha256.Sum256(sc.Text)
	host, _ := os.Hostname()
	s := res.Summary
	r := Result{Command: command, Scenario: sc.Name, ScenarioSHA256: hex.EncodeToString(sum[:]),
		FirmwareName: res.Loop.Greeting.Name, FirmwareBuild: res.Loop.Greeting.Build, FirmwareRevision: revision,
		ToolVersion: rig.ToolVersion(), Host: host, Outcome: string(s.Outcome), Reason: s.Reason, Steps: s.Steps,
		MeanSpeedMPS: s.MeanSpeedMPS, PeakFriction: s.PeakFrictionUtilization, MinNormalForceN: s.MinNormalForceN,
		LatencyP50US: math.NaN(), LatencyP99US: math.NaN(), LatencyMaxUS: math.NaN(), Alarms: s.Alarms}
	if s.LatencyUS != nil {
		r.LatencyP50US, r.LatencyP99US, r.LatencyMaxUS = s.LatencyUS.P50, s.LatencyUS.P99, s.LatencyUS.Max
	}
	return r
}

// Envelope outcomes and what they mean for a stored envelope result:
// pass when every margin searched meets the lab's minimum (and the gait is
// stable), fail when one does not, invalid when nothing failed but a
// figure could not be measured because the host spoiled its runs.

// FromMargins makes the stored result of a margin search: one row for the
// scenario with every axis's limit. greeting is the firmware's, read from
// one of the search's run folders (GreetingOf).
func FromMargins(command string, sc *scenarios.Scenario, res []batch.AxisMargin, greeting record.Greeting, revision string) Result {
	r := envelopeResult(command, sc, greeting, revision)
	r.Margins = map[string]Margin{}
	var missed, unmeasured []string
	for _, a := range res {
		r.Margins[a.Axis] = Margin{Limit: a.Limit, Resolution: a.Tolerance, Unit: a.Unit, Reached: a.Reached, NotMeasured: a.NotMeasured}
		switch {
		case a.NotMeasured != "":
			unmeasured = append(unmeasured, a.Axis)
		case !a.Meets:
			missed = append(missed, a.Axis)
		}
	}
	switch {
	case len(missed) > 0:
		r.Outcome, r.Reason = string(record.Fail), "margin below the required minimum or none: "+strings.Join(missed, ", ")
	case len(unmeasured) > 0:
		r.Outcome, r.Reason = string(record.Invalid), "not measured (host trouble): "+strings.Join(unmeasured, ", ")
	}
	return r
}

// FromStability makes the stored result of a stability estimate.
func FromStability(command string, sc *scenarios.Scenario, rep batch.StabilityReport, greeting record.Greeting, revision string) Result {
	r := envelopeResult(command, sc, greeting, revision)
	r.Stability = stabilityOf(rep)
	if !rep.Stable {
		r.Outcome, r.Reason = string(record.Fail), fmt.Sprintf("spectral radius %.4f is not below 1", rep.SpectralRadius)
	}
	return r
}

// FromGate makes the stored result of preflight's envelope: the gated
// margins and the stability estimate in one row, with the gate's verdict.
func FromGate(command string, sc *scenarios.Scenario, g batch.GateResult, greeting record.Greeting, revision string) Result {
	r := FromMargins(command, sc, g.Margins, greeting, revision)
	r.Outcome, r.Reason = string(record.Pass), ""
	if g.Stability != nil {
		r.Stability = stabilityOf(*g.Stability)
	}
	if !g.Go {
		r.Outcome, r.Reason = string(record.Fail), strings.Join(g.Failures, "; ")
	}
	return r
}

func stabilityOf(rep batch.StabilityReport) *Stability {
	st := &Stability{SpectralRadius: rep.SpectralRadius, RadiusLow: rep.RadiusLow, RadiusHigh: rep.RadiusHigh, Eigenvalues: [][2]float64{}}
	for _, e := range rep.Eigenvalues {
		st.Eigenvalues = append(st.Eigenvalues, [2]float64{e.Re, e.Im})
	}
	return st
}

// envelopeResult is the common part of an envelope row: who and what,
// no run figures (NaN: the trend takes them from runs only).
func envelopeResult(command string, sc *scenarios.Scenario, greeting record.Greeting, revision string) Result {
	sum := sha256.Sum256(sc.Text)
	host, _ := os.Hostname()
	nan := math.NaN()
	return Result{Command: command, Scenario: sc.Name, ScenarioSHA256: hex.EncodeToString(sum[:]),
		FirmwareName: greeting.Name, FirmwareBuild: greeting.Build, FirmwareRevision: revision,
		ToolVersion: rig.ToolVersion(), Host: host, Outcome: string(record.Pass),
		MeanSpeedMPS: nan, PeakFriction: nan, MinNormalForceN: nan, LatencyP50US: nan, LatencyP99US: nan, LatencyMaxUS: nan}
}

// GreetingOf reads the firmware's greeting from a run folder's manifest
// (empty when the folder cannot be read: the row is still worth storing).
func GreetingOf(dir string) record.Greeting {
	if dir == "" {
		return record.Greeting{}
	}
	run, err := record.Open(dir)
	if err != nil {
		return record.Greeting{}
	}
	return run.Manifest.Greeting
}
