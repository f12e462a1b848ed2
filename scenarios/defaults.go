package scenarios

import (
	"fmt"
	"reflect"
	"strconv"
	"strings"
	"time"

	"gaitrig/hil"
	"gaitrig/plant"
)

// fieldDefault is the value a field takes when a scenario leaves it out.
// The loader applies these and docs/scenarios.md lists them, so the page and
// the code cannot disagree (reference_test.go checks the page and the field
// comments against this table).
type fieldDefault struct {
	path  string
	value any
	// when limits the default to scenarios it applies to (nil: all).
	when func(s *Scenario) bool
}

func linkIs(kind string) func(s *Scenario) bool {
	return func(s *Scenario) bool { return s.Controller.Link == kind }
}

// defaults are the fixed-path defaults. Defaults that depend on other
// values (mu_kinetic, alarm severities) are applied in applyDefaults. The
// tick rate and the watchdog are the loop's defaults (hil), the sub-steps
// and the fall limit the plant's: one home each, whether a run comes from
// a scenario or from code.
var defaults = []fieldDefault{
	{"plant.gravity_mps2", 9.81, nil},
	{"terrain.start_m", [2]float64{-1, 0}, nil},
	{"initial.stance", "left", nil},
	{"controller.mode", "walk", linkIs(LinkBuiltin)},
	{"controller.baud", 115200, linkIs(LinkSerial)},
	{"controller.broker", "embedded", linkIs(LinkMQTT)},
	{"controller.rig", "bench", linkIs(LinkMQTT)},
	{"clock.mode", ClockLockstep, nil},
	{"clock.tick_hz", float64(hil.DefaultTickHz), nil},
	{"clock.substeps", plant.DefaultSubSteps, nil},
	{"watchdog_ms", float64(hil.DefaultWatchdog) / float64(time.Millisecond), nil},
	{"physics.on_slip", PolicyContinue, nil},
	{"physics.on_lift_off", PolicyContinue, nil},
	{"physics.fall_torso_angle_rad", plant.DefaultFallTorsoAngle, nil},
	{"sensors.encoder_counts_per_rev", 4096, nil},
	{"sensors.contact_threshold_n", 5.0, nil},
	{"sensors.seed", 1, nil},
	{"actuators.torque_limit_nm", 50.0, nil},
	{"pass.no_trip", true, nil},
	{"margins.tolerance", 0.02, nil},
	{"margins.max_spectral_radius", 0.9, nil},
}

// MuKineticRatio is the default mu_kinetic as a fraction of mu_static: a
// typical ratio of kinetic to static friction for dry contacts (common
// practice).
const MuKineticRatio = 0.8

// formatDefault writes a default the way a scenario would spell it.
func formatDefault(v any) string {
	switch x := v.(type) {
	case float64:
		return strconv.FormatFloat(x, 'g', -1, 64)
	case [2]float64:
		return "[" + formatDefault(x[0]) + ", " + formatDefault(x[1]) + "]"
	case string:
		return x
	}
	return fmt.Sprint(v)
}

// fieldByPath finds the struct field a dotted YAML path names, allocating
// pointer structs on the way.
func fieldByPath(v reflect.Value, path string) (reflect.Value, bool) {
	for _, name := range strings.Split(path, ".") {
		for v.Kind() == reflect.Pointer {
			if v.IsNil() {
				v.Set(reflect.New(v.Type().Elem()))
			}
			v = v.Elem()
		}
		if v.Kind() != reflect.Struct {
			return reflect.Value{}, false
		}
		found := false
		for _, f := range yamlFields(v.Type()) {
			if f.name == name {
				v = v.FieldByIndex(f.index)
				found = true
				break
			}
		}
		if !found {
			return reflect.Value{}, false
		}
	}
	return v, true
}

// applyDefaults fills every field the file left out that has a default.
func (d *decoder) applyDefaults(s *Scenario) {
	root := reflect.ValueOf(s).Elem()
	for _, df := range defaults {
		if _, given := d.present[df.path]; given || d.bad[df.path] {
			continue
		}
		if df.when != nil && !df.when(s) {
			continue
		}
		f, ok := fieldByPath(root, df.path)
		if !ok {
			continue
		}
		val := reflect.ValueOf(df.value)
		if f.Kind() == reflect.Pointer {
			p := reflect.New(f.Type().Elem())
			p.Elem().Set(val.Convert(f.Type().Elem()))
			f.Set(p)
			continue
		}
		f.Set(val.Convert(f.Type()))
	}
	for i := range s.Terrain.Segments {
		if _, given := d.present[fmt.Sprintf("terrain.segments[%d].mu_kinetic", i)]; !given {
			s.Terrain.Segments[i].MuKinetic = MuKineticRatio * s.Terrain.Segments[i].MuStatic
		}
	}
	d.treadmillDefaults(s)
	if s.Alarms == nil {
		s.Alarms = map[string]Severity{}
	}
	for k, v := range DefaultSeverity {
		if _, set := s.Alarms[k]; !set {
			s.Alarms[k] = v
		}
	}
}
