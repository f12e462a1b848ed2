package batch

// This file owns the envelope part of the pre-trial gate (gaitrig
// preflight): the measured margins of the axes the lab set minima for, and
// the closed-loop stability, judged against the scenario's margins block.

import (
	"context"
	"fmt"
	"math"
	"path/filepath"

	"gaitrig/rig"
	"gaitrig/scenarios"
)

// Gate measures a scenario's safety envelope for the preflight verdict.
// The zero value of a field is its default.
type Gate struct {
	// Dir is the folder for the run folders. Required; the gate makes a
	// subfolder "envelope" in it, so it can share preflight's folder.
	Dir string
	// Link overrides the scenario's link.
	Link string
	// Jobs and Seeds are the margin search's (Margins.Jobs, Margins.Seeds).
	Jobs, Seeds int
	// Stability sets the stability estimate (its Dir and Link are the
	// gate's); the gait sensitivity runs are skipped unless set.
	Stability Stability
}

// GateResult is the envelope's verdict.
type GateResult struct {
	// Margins are the searched axes that have a required minimum.
	Margins []AxisMargin `json:"margins"`
	// Stability is the estimate; StabilityError says why there is none.
	Stability      *StabilityReport `json:"stability,omitempty"`
	StabilityError string           `json:"stability_error,omitempty"` // why Stability is nil; empty when it is set
	// MaxSpectralRadius is the bound the upper end of the spectral
	// radius's 95 % bootstrap interval must stay below
	// (margins.max_spectral_radius): the upper end, so that a short or
	// noisy estimate cannot pass on luck.
	MaxSpectralRadius float64 `json:"max_spectral_radius"`
	// Go is true when every margin meets its minimum and the gait is
	// stable within the bound.
	Go bool `json:"go"`
	// Failures say, one line each, what failed and by how much.
	Failures []string `json:"failures"`
}

// GatedAxes are the axes of sc's margins block (all when it names none)
// that have a required minimum.
func GatedAxes(sc *scenarios.Scenario) []string {
	names := sc.Margins.Axes
	if len(names) == 0 {
		names = scenarios.MarginAxes
	}
	var out []string
	for _, n := range names {
		if !math.IsNaN(Required(sc.Margins, n)) {
			out = append(out, n)
		}
	}
	return out
}

// Run measures the gated margins and the stability of sc and judges them.
func (g Gate) Run(ctx context.Context, sc *scenarios.Scenario) (GateResult, error) {
	res := GateResult{MaxSpectralRadius: sc.Margins.MaxSpectralRadius, Go: true}
	if g.Dir == "" {
		return res, rig.Configf("gate: no output folder")
	}
	g.Dir = filepath.Join(g.Dir, "envelope")
	if res.MaxSpectralRadius == 0 {
		res.MaxSpectralRadius = 0.9 // the scenario loader's default, for a hand-made scenario
	}
	if axes := GatedAxes(sc); len(axes) > 0 {
		m, err := Margins{Dir: g.Dir, Link: g.Link, Jobs: g.Jobs, Seeds: g.Seeds}.Search(ctx, sc, axes)
		if err != nil {
			return res, err
		}
		res.Margins = m
		for _, a := range m {
			switch {
			case a.NotMeasured != "":
				res.Failures = append(res.Failures, fmt.Sprintf("margin %s was not measured (run preflight again on a quieter host): %s", a.Axis, a.NotMeasured))
			case a.Error != "":
				res.Failures = append(res.Failures, fmt.Sprintf("margin %s: %s", a.Axis, a.Error))
			case !a.Meets:
				line := fmt.Sprintf("margin %s is %.4g %s, short of the required %.4g %s by %.4g %s", a.Axis, a.Limit, a.Unit, a.Required, a.Unit, a.Shortfall, a.Unit)
				if a.Axis == "friction" {
					line += fmt.Sprintf(" (friction ratio %.3g, required %.3g)", 1/a.Limit, sc.Margins.MinFrictionRatio)
				}
				res.Failures = append(res.Failures, line)
			}
		}
	}
	st := g.Stability
	st.Dir, st.Link = g.Dir, g.Link
	if st.PushNs == 0 {
		st.PushNs = -1
	}
	if st.StepDownM == 0 {
		st.StepDownM = -1
	}
	rep, err := st.Run(ctx, sc)
	if err != nil {
		if ctx.Err() != nil {
			return res, ctx.Err()
		}
		res.StabilityError = err.Error()
		res.Failures = append(res.Failures, "stability could not be estimated: "+err.Error())
	} else {
		res.Stability = &rep
		if !(rep.RadiusHigh < res.MaxSpectralRadius) {
			res.Failures = append(res.Failures, fmt.Sprintf("spectral radius %.3f (95 %% interval up to %.3f) is not below the bound %.3g by %.3f",
				rep.SpectralRadius, rep.RadiusHigh, res.MaxSpectralRadius, rep.RadiusHigh-res.MaxSpectralRadius))
		}
	}
	res.Go = len(res.Failures) == 0
	return res, nil
}
