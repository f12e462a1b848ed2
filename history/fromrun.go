package history

import (
	"crypto/sha256"
	"encoding/hex"
	"math"
	"os"

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
