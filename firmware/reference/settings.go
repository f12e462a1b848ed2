package reference

import (
	"fmt"
	"sort"
	"strings"
)

// settingNames maps the names a scenario may use under controller.settings
// to the gain they set.
var settingNames = map[string]func(g *Gains) *float64{
	"target_speed_mps":         func(g *Gains) *float64 { return &g.TargetSpeed },
	"leg_length_m":             func(g *Gains) *float64 { return &g.LegLength },
	"step_angle_rad":           func(g *Gains) *float64 { return &g.StepAngle },
	"step_speed_gain":          func(g *Gains) *float64 { return &g.StepSpeedGain },
	"step_min_rad":             func(g *Gains) *float64 { return &g.StepMin },
	"step_max_rad":             func(g *Gains) *float64 { return &g.StepMax },
	"swing_kp":                 func(g *Gains) *float64 { return &g.SwingKp },
	"swing_kd":                 func(g *Gains) *float64 { return &g.SwingKd },
	"lean_rad":                 func(g *Gains) *float64 { return &g.Lean },
	"lean_speed_gain":          func(g *Gains) *float64 { return &g.LeanSpeedGain },
	"lean_min_rad":             func(g *Gains) *float64 { return &g.LeanMin },
	"lean_max_rad":             func(g *Gains) *float64 { return &g.LeanMax },
	"torso_kp":                 func(g *Gains) *float64 { return &g.TorsoKp },
	"torso_kd":                 func(g *Gains) *float64 { return &g.TorsoKd },
	"firmware_torque_limit_nm": func(g *Gains) *float64 { return &g.TorqueLimit },
	"belt_gain":                func(g *Gains) *float64 { return &g.Belt.Gain },
	"belt_max_shift_mps":       func(g *Gains) *float64 { return &g.Belt.MaxShift },
}

// SettingNames lists the names GainsFromSettings accepts, sorted.
func SettingNames() []string {
	names := make([]string, 0, len(settingNames))
	for k := range settingNames {
		names = append(names, k)
	}
	sort.Strings(names)
	return names
}

// GainsFromSettings starts from DefaultGains and applies a scenario's
// controller.settings. An unknown name is an error that lists the known
// ones.
func GainsFromSettings(settings map[string]float64) (Gains, error) {
	g := DefaultGains()
	for k, v := range settings {
		f, ok := settingNames[k]
		if !ok {
			return g, fmt.Errorf("reference: unknown controller setting %q; known settings: %s", k, strings.Join(SettingNames(), ", "))
		}
		*f(&g) = v
	}
	if g.StepMin > g.StepMax {
		return g, fmt.Errorf("reference: step_min_rad %g is above step_max_rad %g", g.StepMin, g.StepMax)
	}
	if g.LeanMin > g.LeanMax {
		return g, fmt.Errorf("reference: lean_min_rad %g is above lean_max_rad %g", g.LeanMin, g.LeanMax)
	}
	if !(g.Belt.Gain >= 0) || !(g.Belt.MaxShift >= 0) {
		return g, fmt.Errorf("reference: belt_gain %g and belt_max_shift_mps %g must be ≥ 0 (0 turns the belt term off)", g.Belt.Gain, g.Belt.MaxShift)
	}
	if !(g.TorqueLimit > 0) {
		return g, fmt.Errorf("reference: firmware_torque_limit_nm %g must be > 0", g.TorqueLimit)
	}
	return g, nil
}
