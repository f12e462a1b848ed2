package scenarios

import (
	"errors"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"gaitrig/plant"
)

// TestBrokenFiles loads every file under testdata/broken and checks the
// messages: each names the file, the line and the field, and says what is
// allowed. Every broken file must appear in the table, so a new file without
// an expectation fails.
func TestBrokenFiles(t *testing.T) {
	tests := []struct {
		file string
		want []string // substrings of the error, in order of appearance
	}{
		{"knee-foot-longer-than-shank.yaml", []string{
			"knee-foot-longer-than-shank.yaml:9: plant.legs.foot_radius_m: 0.5 m is larger than the shank length 0.45 m; allowed 0 ≤ foot_radius_m ≤ shank.length_m",
			"knee-foot-longer-than-shank.yaml:13: plant.legs.shank.com_m: 0.6 m is outside the shank of length 0.45 m",
			"knee-foot-longer-than-shank.yaml:15: plant.legs.shank.knee_latch: expected true or false, got the text \"maybe\"",
		}},
		{"knee-shank-problems.yaml", []string{
			"knee-shank-problems.yaml:10: plant.legs.shank.length_m: missing required field length_m in plant.legs.shank",
			"knee-shank-problems.yaml:12: plant.legs.shank.knee_torque_nm: unknown field \"knee_torque_nm\"; allowed here: length_m, mass_kg, com_m, inertia_kgm2, knee_actuated, knee_latch, knee_stop_rad",
			"knee-shank-problems.yaml:15: plant.legs.left.shank.mass_kg: -1 kg is out of range",
		}},
		{"knee-stop-out-of-range.yaml", []string{
			"knee-stop-out-of-range.yaml:14: plant.legs.shank.knee_stop_rad: 2 rad is out of range; allowed |knee_stop_rad| < π/2 (1.5708)",
			"knee-stop-out-of-range.yaml:17: plant.legs.right.shank.knee_stop_rad: -1.6 rad is out of range",
		}},
		{"knee-override-without-shank.yaml", []string{
			"knee-override-without-shank.yaml:11: plant.legs.right.shank: overrides a shank the legs do not have",
			"knee-override-without-shank.yaml:23: actuators.joint_torque_limits_nm.knee_right: this walker has no joint \"knee_right\"; its joints are hip",
		}},
		{"foot-radius-too-large.yaml", []string{"foot-radius-too-large.yaml:9: plant.legs.foot_radius_m: 1.2 m is larger than the leg length 0.9 m; allowed 0 ≤ foot_radius_m ≤ length_m"}},
		{"unknown-field.yaml", []string{"unknown-field.yaml:8: plant.legs.colour: unknown field \"colour\"; allowed here: length_m"}},
		{"unit-missing-in-name.yaml", []string{"unit-missing-in-name.yaml:9: plant.legs.foot_radius: unknown field", "did you mean foot_radius_m? units are part of field names"}},
		{"unit-in-value.yaml", []string{"unit-in-value.yaml:6: plant.legs.mass_kg: \"4 kg\" has a unit written in the value; write a plain number in kg"}},
		{"word-for-number.yaml", []string{"word-for-number.yaml:12: terrain.segments[0].length_m: expected a number in m, got the text \"twenty\""}},
		{"missing-hip-mass.yaml", []string{"missing-hip-mass.yaml:2: plant.hip_mass_kg: missing required field hip_mass_kg in plant"}},
		{"missing-run.yaml", []string{"missing-run.yaml:1: run: missing required field run"}},
		{"literal-password.yaml", []string{"literal-password.yaml:18: controller.password: secrets never go in a scenario file", "password_env"}},
		{"password-in-url.yaml", []string{"password-in-url.yaml:18: controller.broker: the URL holds credentials"}},
		{"broker-websocket.yaml", []string{"broker-websocket.yaml:18: controller.broker: \"ws://127.0.0.1:8080\" is not a broker address", "schemes tcp, ssl, tls, mqtt, mqtts)"}},
		{"massless-leg-no-inertia.yaml", []string{"massless-leg-no-inertia.yaml:8: plant.legs.inertia_kgm2: a massless leg (mass_kg 0) needs inertia_kgm2 > 0"}},
		{"bad-link.yaml", []string{"bad-link.yaml:17: controller.link: \"carrier-pigeon\" is not allowed; allowed: builtin, serial, mqtt, none"}},
		{"serial-without-port.yaml", []string{"serial-without-port.yaml:16: controller.port: missing required field port"}},
		{"port-on-builtin.yaml", []string{"port-on-builtin.yaml:18: controller.port: port applies only to link serial"}},
		{"kinetic-above-static.yaml", []string{"kinetic-above-static.yaml:14: terrain.segments[0].mu_kinetic: 0.7 is outside", "allowed 0 ≤ mu_kinetic ≤ mu_static"}},
		{"fractional-steps.yaml", []string{"fractional-steps.yaml:19: run.max_steps: expected a whole number, got 10.5"}},
		{"one-leg-angle.yaml", []string{"one-leg-angle.yaml:15: initial.leg_angles_rad: expected 2 numbers [left, right], got 1"}},
		{"torso-angle-without-torso.yaml", []string{"torso-angle-without-torso.yaml:16: initial.torso_angle_rad: torso_angle_rad applies only to a walker with a torso"}},
		{"bad-faults.yaml", []string{
			"bad-faults.yaml:22: faults[0].rate: 1.5 is out of range; allowed 0 < rate ≤ 1",
			"bad-faults.yaml:23: faults[0].fixed_ms: does not apply to a drop fault; allowed for drop: from_s, until_s, rate",
			"bad-faults.yaml:24: faults[1]: a push needs impulse_ns [x, y] or force_n [x, y] with duration_s"}},
		{"bad-alarms.yaml", []string{
			"bad-alarms.yaml:21: alarms.friction_limit: \"ignore\" is not allowed; allowed: warn, trip",
			"bad-alarms.yaml:22: alarms.slipping: unknown alarm kind \"slipping\"; known kinds: friction_limit"}},
		{"bad-clock.yaml", []string{
			"bad-clock.yaml:21: clock.mode: \"realtime\" is not allowed; allowed: lockstep, wallclock",
			"bad-clock.yaml:22: clock.tick_hz: 5 is out of range; allowed 10 ≤ tick_hz ≤ 20000"}},
		{"bad-criteria.yaml", []string{
			"bad-criteria.yaml:22: pass.max_speed_mps: 0.5 m/s is below min_speed_mps 1 m/s",
			"bad-criteria.yaml:23: pass.max_friction_utilization: 1.5 is out of range; allowed 0 < max_friction_utilization ≤ 1"}},
		{"unknown-joint.yaml", []string{"unknown-joint.yaml:22: actuators.joint_torque_limits_nm.knee: this walker has no joint \"knee\"; its joints are hip"}},
		{"bad-margins.yaml", []string{
			"bad-margins.yaml:21: margins.axes[1]: unknown axis \"wind\"",
			"bad-margins.yaml:22: margins.tolerance: 0.9 is out of range; allowed 0 < tolerance ≤ 0.5",
			"bad-margins.yaml:23: margins.min_friction_ratio: 0.5 is out of range",
			"bad-margins.yaml:24: margins.min_push_ns: -1 N·s is out of range",
			"bad-margins.yaml:26: margins.far.wind: unknown axis \"wind\""}},
		{"bad-name.yaml", []string{"bad-name.yaml:1: name: \"broken case!\" is not a valid name"}},
		{"duplicate-key.yaml", []string{"duplicate-key.yaml:6: ", "\"length_m\" already defined"}},
		{"syntax-error.yaml", []string{"syntax-error.yaml:2: YAML syntax error"}},
		{"empty.yaml", []string{"empty.yaml:1: the file is empty"}},
		{"several-problems.yaml", []string{
			"several-problems.yaml:6: plant.legs.mass_kg: -4 kg is out of range; allowed 0 ≤ mass_kg ≤ 10000",
			"several-problems.yaml:9: plant.legs.foot_radius_m: 1.2 m is larger than the leg length 0.9 m",
			"several-problems.yaml:20: watchdog_ms: 0.5 ms is out of range; allowed 2 ticks (2 ms at 1000 Hz) ≤ watchdog_ms ≤ 60000"}},
		{"bad-belt.yaml", []string{
			"bad-belt.yaml:14: terrain.segments[0].belt: a belt needs exactly one speed profile: speed_mps (constant), ramp or points; 2 given",
			"bad-belt.yaml:17: terrain.segments[0].belt.start_m: 5 m is out of range; allowed 0 < start_m < the belt's length_m (4)",
			"bad-belt.yaml:19: terrain.segments[0].belt.pulses[0].rise_s: missing required field rise_s",
			"bad-belt.yaml:20: terrain.segments[0].belt.pulses[1].phase: phase applies only to a pulse at_step",
			"bad-belt.yaml:20: terrain.segments[0].belt.pulses[1].rise_s: 0 s is out of range; allowed 0 < rise_s ≤ 10"}},
		{"two-belts.yaml", []string{
			"two-belts.yaml:15: terrain.segments[0].belt.points[1].t_s: 0 s is not after the point before (0 s)",
			"two-belts.yaml:18: terrain.segments[1].belt: a second belt (the first is terrain.segments[0]); one treadmill belt per scenario",
			"two-belts.yaml:20: terrain.segments[1].belt.end_margin_m: 3 m is out of range; allowed 0 < end_margin_m < half the belt (2 m)"}},
		{"bad-harness.yaml", []string{
			"bad-harness.yaml:21: harness.drop_m: -0.1 m is out of range; allowed 0 < drop_m ≤ 2",
			"bad-harness.yaml:22: harness.stiffness_npm: 0 is out of range",
			"bad-harness.yaml:23: harness.rope_colour: unknown field \"rope_colour\""}},
		{"override-too-large.yaml", []string{"override-too-large.yaml:11: plant.legs.right.foot_radius_m: 1.5 m is larger than the leg length 0.9 m"}},
		{"unit-unquoted.yaml", []string{"unit-unquoted.yaml:14: terrain.segments[0].slope_rad: \"5 deg\" has a unit written in the value; write a plain number in rad"}},
		{"secret-as-env-name.yaml", []string{"secret-as-env-name.yaml:18: controller.password_env: \"hunter2!\" is not an environment variable name", "never the secret itself"}},
		{"wrong-block-types.yaml", []string{
			"wrong-block-types.yaml:2: plant: expected a block of fields, got the number 5\n",
			"wrong-block-types.yaml:4: terrain.segments: expected a list of blocks, each entry starting with '- ', got a block of fields"}},
		{"bad-sensors.yaml", []string{
			"bad-sensors.yaml:21: sensors.angle_noise_rad: -0.01 rad is out of range",
			"bad-sensors.yaml:22: sensors.seed: expected a number, got the text \"lots\""}},
		{"exponent-overflow.yaml", []string{"exponent-overflow.yaml:6: plant.legs.mass_kg: 1e400 is too large: it overflows a 64-bit number"}},
		{"exponent-underflow.yaml", []string{"exponent-underflow.yaml:8: plant.legs.inertia_kgm2: 1e-400 is too small: it underflows to 0"}},
		{"swing-foot-in-ground.yaml", []string{"swing-foot-in-ground.yaml:16: initial.leg_angles_rad: cannot stand the walker: " +
			"with the left (stance) leg at 0.2 rad and the right (swing) leg at -0.2 rad on a slope of -0.15 rad (terrain.segments[0].slope_rad, line 14) " +
			"the swing foot would be 0.03741 m below the ground"}},
		{"slope-too-steep.yaml", []string{"slope-too-steep.yaml:14: terrain.segments[0].slope_rad: cannot stand the walker on this segment: at 1.57 rad it is too steep"}},
		{"undefined-alias.yaml", []string{"undefined-alias.yaml:6: plant.legs.mass_kg: alias *legmass refers to no anchor defined before it; define it with &legmass"}},
		{"utf16.yaml", []string{"utf16.yaml:1: the file is UTF-16 text (it starts with a UTF-16 byte-order mark); save it as UTF-8"}},
		{"utf16-without-bom.yaml", []string{"utf16-without-bom.yaml:1: the file holds NUL bytes: it is UTF-16 or binary, not text; save it as UTF-8"}},
		{"nested-too-deep.yaml", []string{"nested-too-deep.yaml:3: nested more than 32 levels deep"}},
	}
	// Files whose problems are counted exactly: several reported together,
	// nothing repeated or cascaded from a bad parent.
	counts := map[string]int{"several-problems.yaml": 3, "bad-belt.yaml": 5, "two-belts.yaml": 3, "bad-harness.yaml": 3, "wrong-block-types.yaml": 2, "bad-faults.yaml": 3,
		"utf16.yaml": 1, "utf16-without-bom.yaml": 1, "nested-too-deep.yaml": 1, "swing-foot-in-ground.yaml": 1,
		"knee-foot-longer-than-shank.yaml": 3, "knee-shank-problems.yaml": 3, "knee-override-without-shank.yaml": 2}
	seen := map[string]bool{}
	for _, tc := range tests {
		seen[tc.file] = true
		t.Run(tc.file, func(t *testing.T) {
			path := filepath.Join("testdata", "broken", tc.file)
			s, err := Load(path)
			if err == nil {
				t.Fatalf("loaded %s without error: %+v", path, s.Name)
			}
			var se *Error
			if !errors.As(err, &se) {
				t.Fatalf("error is %T, want *scenarios.Error: %v", err, err)
			}
			msg := err.Error()
			at := 0
			for _, w := range tc.want {
				i := strings.Index(msg[at:], w)
				if i < 0 {
					t.Fatalf("error does not contain (after position %d)\n  %q\ngot:\n%s", at, w, msg)
				}
				at += i + len(w)
			}
			if n, ok := counts[tc.file]; ok && len(se.Problems) != n {
				t.Errorf("want %d problems, got %d:\n%s", n, len(se.Problems), msg)
			}
			for _, p := range se.Problems {
				if p.Line <= 0 || p.File != path {
					t.Errorf("problem without file and line: %+v", p)
				}
				// A message quotes what it must to be understood, never
				// kilobytes of the file (a UTF-16 file once printed 8 KB).
				if len(p.Msg) > 500 {
					t.Errorf("message of %d bytes: %.200q…", len(p.Msg), p.Msg)
				}
			}
		})
	}
	files, err := filepath.Glob(filepath.Join("testdata", "broken", "*.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range files {
		if !seen[filepath.Base(f)] {
			t.Errorf("%s has no expected message in the table", f)
		}
	}
}

func TestDefaultsFilledIn(t *testing.T) {
	s, err := Load(filepath.Join("testdata", "valid-minimal.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	muS := 0.8 // runtime product, as the loader computes it
	checks := []struct {
		name      string
		got, want any
	}{
		{"gravity", s.Plant.GravityMPS2, 9.81},
		{"terrain start", s.Terrain.StartM, [2]float64{-1, 0}},
		{"mu_kinetic", s.Terrain.Segments[0].MuKinetic, MuKineticRatio * muS},
		{"stance", s.Initial.Stance, "left"},
		{"mode", s.Controller.Mode, "walk"},
		{"baud left empty for builtin", s.Controller.Baud, 0},
		{"clock", s.Clock.Mode, ClockLockstep},
		{"tick_hz", s.Clock.TickHz, 1000.0},
		{"substeps", s.Clock.Substeps, 1},
		{"watchdog", s.WatchdogMS, 50.0},
		{"on_slip", s.Physics.OnSlip, PolicyContinue},
		{"fall torso", s.Physics.FallTorsoAngleRad, 1.2},
		{"encoder", s.Sensors.EncoderCountsPerRev, 4096},
		{"contact threshold", s.Sensors.ContactThresholdN, 5.0},
		{"seed", s.Sensors.Seed, int64(1)},
		{"torque limit", s.Actuators.TorqueLimitNM, 50.0},
		{"no_trip", s.Pass.NoTrip != nil && *s.Pass.NoTrip, true},
		{"alarm severities complete", len(s.Alarms), len(AlarmKinds)},
		{"friction_limit severity", s.Alarms[AlarmFrictionLimit], SeverityTrip},
		{"joints", strings.Join(s.JointNames(), ","), "hip"},
	}
	for _, c := range checks {
		if c.got != c.want {
			t.Errorf("%s: got %v, want %v", c.name, c.got, c.want)
		}
	}
}

func TestLinkDefaults(t *testing.T) {
	base, err := os.ReadFile(filepath.Join("testdata", "valid-minimal.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		link  string
		check func(s *Scenario) string
	}{
		{"link: serial\n  port: /dev/ttyUSB0", func(s *Scenario) string {
			if s.Controller.Baud != 115200 || s.Controller.Mode != "" {
				return "serial: want baud 115200 and no mode"
			}
			return ""
		}},
		{"link: mqtt\n  username_env: RIG_USER\n  password_env: RIG_PASS", func(s *Scenario) string {
			if s.Controller.Broker != "embedded" || s.Controller.Rig != "bench" || s.Controller.PasswordEnv != "RIG_PASS" {
				return "mqtt: want broker embedded, rig bench, password_env RIG_PASS"
			}
			return ""
		}},
		{"link: none", func(s *Scenario) string {
			if s.Controller.Mode != "" {
				return "none: want no mode"
			}
			return ""
		}},
	}
	for _, tc := range tests {
		text := strings.Replace(string(base), "link: builtin", tc.link, 1)
		s, err := Parse("link.yaml", []byte(text))
		if err != nil {
			t.Errorf("%s: %v", tc.link, err)
			continue
		}
		if msg := tc.check(s); msg != "" {
			t.Error(msg)
		}
	}
}

func TestLibraryLoadsAndValidates(t *testing.T) {
	want := []string{"latency-stress", "level-demo", "low-friction-patch", "passive-downhill", "push-recovery", "slope-change"}
	lib := Library()
	if len(lib) < len(want) {
		t.Fatalf("library has %d entries, want at least %d", len(lib), len(want))
	}
	names := map[string]bool{}
	for _, e := range lib {
		names[e.Name] = true
		s, err := LoadBuiltin(e.Name)
		if err != nil {
			t.Errorf("%s: %v", e.Name, err)
			continue
		}
		if s.Name != e.Name {
			t.Errorf("%s: the name field says %q; keep file name and name field equal", e.File, s.Name)
		}
		if s.Description == "" || s.Description != e.Description {
			t.Errorf("%s: description missing or not listed", e.Name)
		}
		if s.File != BuiltinPrefix+e.Name || Hash(s.Text) == "" {
			t.Errorf("%s: file %q", e.Name, s.File)
		}
		if _, err := s.PlantParams(); err != nil {
			t.Errorf("%s: plant rejects the parameters: %v", e.Name, err)
		}
	}
	for _, n := range want {
		if !names[n] {
			t.Errorf("built-in scenario %s is missing", n)
		}
	}
	demo, err := LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	l := demo.Leg(0)
	if demo.Plant.Torso == nil || l.LengthM < 0.8 || l.LengthM > 1.0 || l.FootRadiusM/l.LengthM < 0.25 || l.FootRadiusM/l.LengthM > 0.35 {
		t.Errorf("level-demo: want a torso walker with leg ≈ 0.9 m and foot radius ≈ 0.3 × leg, got %+v torso %v", l, demo.Plant.Torso)
	}
	if demo.Controller.Link != LinkBuiltin || demo.Clock.Mode != ClockLockstep {
		t.Errorf("level-demo: want builtin link in lockstep")
	}
	if _, err := LoadBuiltin("no-such"); err == nil || !strings.Contains(err.Error(), "level-demo") {
		t.Errorf("unknown built-in: want an error listing the library, got %v", err)
	}
	if _, err := LoadBuiltin("../scenario"); err == nil {
		t.Error("a path is not a built-in name")
	}
}

func TestPlantParamsOverrides(t *testing.T) {
	base, err := os.ReadFile(filepath.Join("testdata", "valid-minimal.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Replace(string(base), "    foot_radius_m: 0.27\n",
		"    foot_radius_m: 0.27\n    left:\n      mass_kg: 5\n    right:\n      foot_radius_m: 0.2\n", 1)
	text += "  duration_s: 12\n"
	s, err := Parse("override.yaml", []byte(text))
	if err != nil {
		t.Fatal(err)
	}
	p, err := s.PlantParams()
	if err != nil {
		t.Fatal(err)
	}
	if p.Legs[0].Mass != 5 || p.Legs[0].FootRadius != 0.27 || p.Legs[1].Mass != 4 || p.Legs[1].FootRadius != 0.2 {
		t.Errorf("overrides not applied: %+v", p.Legs)
	}
	if p.HipMass != 8 || p.Gravity != 9.81 || len(p.Terrain.Segments) != 1 || p.Terrain.Segments[0].MuKinetic != MuKineticRatio*p.Terrain.Segments[0].MuStatic || p.Torso != nil {
		t.Errorf("params: %+v", p)
	}
	if s.Run.DurationS != 12 || s.Run.MaxSteps != 10 {
		t.Errorf("run: %+v", s.Run)
	}
}

// TestMassOnlyInAnOverride checks that the whole-walker mass check counts
// the per-side overrides: a walker whose only mass is one leg's override has
// mass and loads.
func TestMassOnlyInAnOverride(t *testing.T) {
	base, err := os.ReadFile(filepath.Join("testdata", "valid-minimal.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Replace(string(base), "  hip_mass_kg: 8\n", "  hip_mass_kg: 0\n", 1)
	text = strings.Replace(text, "    mass_kg: 4\n", "    mass_kg: 0\n", 1)
	text = strings.Replace(text, "    foot_radius_m: 0.27\n", "    foot_radius_m: 0.27\n    left:\n      mass_kg: 2\n", 1)
	s, err := Parse("override-mass.yaml", []byte(text))
	if err != nil {
		t.Fatal(err)
	}
	if m := s.Leg(0).MassKG + s.Leg(1).MassKG + s.Plant.HipMassKG; m != 2 {
		t.Errorf("walker mass %g kg, want 2", m)
	}
	// With the override gone the walker has no mass, and the message says so
	// at the hip mass line.
	text = strings.Replace(text, "    left:\n      mass_kg: 2\n", "", 1)
	_, err = Parse("no-mass.yaml", []byte(text))
	if err == nil || !strings.Contains(err.Error(), "no-mass.yaml:3: plant.hip_mass_kg: the walker has no mass at all") {
		t.Errorf("want the no-mass problem at line 3, got %v", err)
	}
}

func TestHash(t *testing.T) {
	// SHA-256 of the empty string and of "abc": FIPS 180-2 test vectors.
	if got := Hash(nil); got != "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855" {
		t.Errorf("Hash(empty) = %s", got)
	}
	if got := Hash([]byte("abc")); got != "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad" {
		t.Errorf("Hash(abc) = %s", got)
	}
}

// FuzzParse feeds arbitrary text to the loader: it must never panic, and a
// rejected file must come with located problems.
func FuzzParse(f *testing.F) {
	files, _ := filepath.Glob(filepath.Join("testdata", "broken", "*.yaml"))
	files = append(files, filepath.Join("testdata", "valid-minimal.yaml"))
	for _, fn := range files {
		if b, err := os.ReadFile(fn); err == nil {
			f.Add(b)
		}
	}
	f.Add([]byte("a: &x [1, *x]\n"))
	f.Add([]byte("plant: !!str 5\n"))
	f.Fuzz(func(t *testing.T, text []byte) {
		s, err := Parse("fuzz.yaml", text)
		if err == nil {
			if s == nil {
				t.Fatal("nil scenario without error")
			}
			return
		}
		var se *Error
		if !errors.As(err, &se) || len(se.Problems) == 0 {
			t.Fatalf("error without problems: %v", err)
		}
	})
}

func TestResolve(t *testing.T) {
	tests := []struct {
		arg, wantFile, wantErr string
	}{
		{"level-demo", "builtin:level-demo", ""},
		{"builtin:push-recovery", "builtin:push-recovery", ""},
		{filepath.Join("testdata", "valid-minimal.yaml"), filepath.Join("testdata", "valid-minimal.yaml"), ""},
		{"no-such-scenario", "", "neither a file nor a built-in scenario; built-in: latency-stress, level-demo"},
		{filepath.Join("testdata", "broken", "bad-link.yaml"), "", "bad-link.yaml:17: controller.link"},
		{"builtin:nope", "", "no built-in scenario \"nope\""},
	}
	for _, tc := range tests {
		s, err := Resolve(tc.arg)
		switch {
		case tc.wantErr != "":
			if err == nil || !strings.Contains(err.Error(), tc.wantErr) {
				t.Errorf("%s: want error containing %q, got %v", tc.arg, tc.wantErr, err)
			}
		case err != nil:
			t.Errorf("%s: %v", tc.arg, err)
		case s.File != tc.wantFile:
			t.Errorf("%s: file %q, want %q", tc.arg, s.File, tc.wantFile)
		}
	}
}

// BenchmarkParse measures loading the level-demo scenario from its text.
func BenchmarkParse(b *testing.B) {
	text, err := BuiltinText("level-demo")
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := Parse("level-demo.yaml", text); err != nil {
			b.Fatal(err)
		}
	}
}

// variant returns valid-minimal.yaml with each old text replaced by new.
func variant(t testing.TB, pairs ...string) []byte {
	t.Helper()
	base, err := os.ReadFile(filepath.Join("testdata", "valid-minimal.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	text := string(base)
	for i := 0; i < len(pairs); i += 2 {
		if !strings.Contains(text, pairs[i]) {
			t.Fatalf("valid-minimal.yaml has no %q", pairs[i])
		}
		text = strings.Replace(text, pairs[i], pairs[i+1], 1)
	}
	return []byte(text)
}

// TestExponentNotation: YAML 1.2 reads 1e-9 as a number; the parser reads
// it as text, and the loader used to call it "quoted text".
func TestExponentNotation(t *testing.T) {
	text := variant(t,
		"    mass_kg: 4\n", "    mass_kg: 1e1\n",
		"    inertia_kgm2: 0.25\n", "    inertia_kgm2: 25E-2\n",
		"[0.2, -0.2]", "[2e-1, -2e-1]\n  leg_rates_radps: [-1e-2, +1e-2]",
		"  max_steps: 10\n", "  max_steps: 1e1\n")
	s, err := Parse("exponent.yaml", text)
	if err != nil {
		t.Fatal(err)
	}
	l := s.Leg(0)
	if l.MassKG != 10 || l.InertiaKGM2 != 0.25 || s.Initial.LegAnglesRad[0] != 0.2 || s.Initial.LegAnglesRad[1] != -0.2 ||
		s.Initial.LegRatesRadps[0] != -0.01 || s.Initial.LegRatesRadps[1] != 0.01 || s.Run.MaxSteps != 10 {
		t.Errorf("decoded mass %g, inertia %g, angles %v, rates %v, max_steps %d", l.MassKG, l.InertiaKGM2,
			s.Initial.LegAnglesRad, s.Initial.LegRatesRadps, s.Run.MaxSteps)
	}
	// Quoted, it is still text, and a fraction is no step count.
	for _, c := range []struct{ text, want string }{
		{`    mass_kg: "1e1"` + "\n", `plant.legs.mass_kg: "1e1" is quoted text`},
		{"    mass_kg: '1e1'\n", `plant.legs.mass_kg: "1e1" is quoted text`},
	} {
		_, err := Parse("quoted.yaml", variant(t, "    mass_kg: 4\n", c.text))
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%q: got %v, want %q", c.text, err, c.want)
		}
	}
	_, err = Parse("steps.yaml", variant(t, "  max_steps: 10\n", "  max_steps: 15e-1\n"))
	if err == nil || !strings.Contains(err.Error(), "run.max_steps: expected a whole number, got 15e-1") {
		t.Errorf("fractional step count: %v", err)
	}
}

// TestByteOrderMark: a UTF-8 file saved with a byte-order mark loads, and
// the scenario keeps the file's exact bytes (its hash is the file's).
func TestByteOrderMark(t *testing.T) {
	text := append([]byte("\xEF\xBB\xBF"), variant(t)...)
	s, err := Parse("bom.yaml", text)
	if err != nil {
		t.Fatal(err)
	}
	if s.Name != "broken-case" || Hash(s.Text) != Hash(text) {
		t.Errorf("name %q, text hash differs from the file's: %v", s.Name, Hash(s.Text) != Hash(text))
	}
}

// TestNearlyMasslessLegs: the point-foot limit the plant does support, a
// tiny mass at the foot written in exponent notation, loads and stands.
func TestNearlyMasslessLegs(t *testing.T) {
	s, err := Parse("point-foot.yaml", variant(t,
		"  hip_mass_kg: 8\n", "  hip_mass_kg: 1\n",
		"    mass_kg: 4\n", "    mass_kg: 1e-8\n",
		"    com_m: 0.35\n", "    com_m: 0.9\n",
		"    inertia_kgm2: 0.25\n", "    inertia_kgm2: 0\n"))
	if err != nil {
		t.Fatal(err)
	}
	if m := s.Leg(1).MassKG; m != 1e-8 {
		t.Errorf("leg mass %g", m)
	}
}

// TestRefusedBeforeParsing: input the parser cannot handle in bounded time
// and memory is refused by the loader before the parser sees it (a 200 KB
// nested file used to take minutes and gigabytes). Speed is measured in the
// benchmarks below, not asserted here.
func TestRefusedBeforeParsing(t *testing.T) {
	dir := t.TempDir()
	write := func(name string, text []byte) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, text, 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	deep := write("deep.yaml", deepText(100_000))
	fields := write("fields.yaml", manyFields(MaxFields+1))
	huge := filepath.Join(dir, "huge.yaml")
	f, err := os.Create(huge)
	if err != nil {
		t.Fatal(err)
	}
	if err := f.Truncate(50 << 20); err != nil { // 50 MB, sparse: nothing to read if the size is checked first
		t.Fatal(err)
	}
	f.Close()
	cases := []struct {
		file, want string
	}{
		{deep, deep + ":2: nested more than 32 levels deep"},
		{fields, fields + ":5001: more than 5000 fields (name: value pairs)"},
		{huge, huge + ": the file is 52428800 bytes; a scenario file may be at most 1048576 bytes (1 MiB)"},
	}
	if _, err := os.Stat("/dev/zero"); err == nil {
		// Not a regular file: its size says nothing, so the limit is on
		// what is read.
		cases = append(cases, struct{ file, want string }{"/dev/zero", "/dev/zero: the file is more than 1048576 bytes"})
	}
	for _, c := range cases {
		_, err := Load(c.file)
		var se *Error
		if !errors.As(err, &se) || len(se.Problems) != 1 || !strings.Contains(err.Error(), c.want) {
			t.Errorf("Load(%s) = %v, want one problem %q", filepath.Base(c.file), err, c.want)
		}
	}
	if _, err := Parse("huge.yaml", make([]byte, 50<<20)); err == nil || !strings.Contains(err.Error(), "huge.yaml: the file is 52428800 bytes") {
		t.Errorf("Parse of 50 MB: %v", err)
	}
}

// deepText is a scenario whose plant nests n brackets deep.
func deepText(n int) []byte {
	return []byte("name: deep\nplant: " + strings.Repeat("[", n) + strings.Repeat("]", n) + "\n")
}

// manyFields is a file of n unknown fields after the name.
func manyFields(n int) []byte {
	var b strings.Builder
	b.WriteString("name: fields\n")
	for i := 0; i < n; i++ {
		b.WriteString("k")
		b.WriteString(strings.Repeat("x", i%7))
		b.WriteString(": 1\n")
	}
	return []byte(b.String())
}

// TestMeasure checks the pre-parse estimate of depth and field count on
// layouts whose structure is known by hand, and that text which only looks
// like structure (brackets and colons in quoted or plain text, comments)
// is not counted.
func TestMeasure(t *testing.T) {
	cases := []struct {
		text          string
		depth, fields int
	}{
		{"a: 1\n", 1, 1},
		{"a:\n  b:\n    c: 1\n", 3, 3},
		{"a:\n  b: [1, [2, {c: 3}]]\n", 5, 3},      // two block levels, three brackets
		{"- - - x\n", 4, 0},                        // compact list entries: one level each
		{"s:\n  - a: 1\n    b: 2\n", 3, 3},         // the list entry and its block
		{"d: a [draft] {note}: x\n", 1, 2},         // plain text: brackets are not flow, "}:" is a field to the scan
		{"d: \"[[[ a: b\"\n", 1, 1},                // quoted: nothing inside counts
		{"d: 'it''s [x'\n", 1, 1},                  // doubled quote inside single quotes
		{"# [[[[ a: b\n\nd: 1 # [[[ c: d\n", 1, 1}, // comments
		{"a: [x,\n  [y,\n   [z]]]\n", 4, 1},        // flow spanning lines
	}
	for _, c := range cases {
		sh := measure([]byte(c.text))
		if sh.depth != c.depth || sh.fields != c.fields {
			t.Errorf("measure(%q) = depth %d, fields %d; want %d, %d", c.text, sh.depth, sh.fields, c.depth, c.fields)
		}
	}
	// Every built-in scenario is far inside the limits.
	for _, e := range Library() {
		text, err := BuiltinText(e.Name)
		if err != nil {
			t.Fatal(err)
		}
		if sh := measure(text); sh.depth > 8 || sh.fields > 200 {
			t.Errorf("%s: depth %d, fields %d", e.Name, sh.depth, sh.fields)
		}
	}
}

// BenchmarkRefuse measures how fast, and with how much memory, the loader
// refuses input it must not parse.
func BenchmarkRefuse(b *testing.B) {
	inputs := []struct {
		name string
		text []byte
	}{
		{"deep-200KB", deepText(100_000)},
		{"fields", manyFields(MaxFields + 1)},
		{"size-50MB", make([]byte, 50<<20)},
	}
	for _, in := range inputs {
		b.Run(in.name, func(b *testing.B) {
			b.ReportAllocs()
			for i := 0; i < b.N; i++ {
				if _, err := Parse("x.yaml", in.text); err == nil {
					b.Fatal("accepted")
				}
			}
		})
	}
}

// TestPlantParamsShanks checks that a shank block becomes plant shanks on
// both legs, that a side's shank override changes that side only (the
// knee stop angle among them), and that
// actuated knees add their joints after the hips.
func TestPlantParamsShanks(t *testing.T) {
	base, err := os.ReadFile(filepath.Join("testdata", "valid-minimal.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Replace(string(base), "    foot_radius_m: 0.27\n",
		"    foot_radius_m: 0.27\n    shank:\n      length_m: 0.5\n      mass_kg: 1\n      com_m: 0.2\n      inertia_kgm2: 0.01\n      knee_latch: true\n"+
			"    right:\n      shank:\n        mass_kg: 1.5\n        knee_actuated: true\n        knee_stop_rad: -0.05\n", 1)
	s, err := Parse("kneed.yaml", []byte(text))
	if err != nil {
		t.Fatal(err)
	}
	p, err := s.PlantParams()
	if err != nil {
		t.Fatal(err)
	}
	l, r := p.Legs[0].Shank, p.Legs[1].Shank
	if l == nil || r == nil {
		t.Fatalf("shanks not built: %+v", p.Legs)
	}
	if want := (plant.Shank{Length: 0.5, Mass: 1, COMDist: 0.2, Inertia: 0.01, Latch: true}); *l != want {
		t.Errorf("left shank %+v, want %+v", *l, want)
	}
	if want := (plant.Shank{Length: 0.5, Mass: 1.5, COMDist: 0.2, Inertia: 0.01, Actuated: true, Latch: true, StopAngle: -0.05}); *r != want {
		t.Errorf("right shank %+v, want %+v", *r, want)
	}
	if s.Plant.Legs.Shank.MassKG != 1 || s.Plant.Legs.Shank.KneeActuated {
		t.Errorf("the override changed the shared shank: %+v", *s.Plant.Legs.Shank)
	}
	if got := s.JointNames(); !slices.Equal(got, []string{"hip", "knee_right"}) {
		t.Errorf("joints %v, want [hip knee_right]", got)
	}
	m, err := plant.New(p, s.PlantOptions())
	if err != nil {
		t.Fatal(err)
	}
	if got := m.JointNames(); !slices.Equal(got, s.JointNames()) {
		t.Errorf("plant joints %v, scenario joints %v", got, s.JointNames())
	}
}
