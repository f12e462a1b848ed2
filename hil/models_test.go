package hil

import (
	"context"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"gaitrig/bridges/protocol"
)

func TestQuantize(t *testing.T) {
	step := 2 * math.Pi / 4096
	tests := []struct {
		in   float64
		cpr  int
		want float64
	}{
		{0.3, 0, 0.3},             // no quantization
		{0.3, 4096, 196 * step},   // 0.3 rad = 195.57 counts
		{-0.3, 4096, -196 * step}, // symmetric
		{0.4 * step, 4096, 0},     // below half a count
		{0.6 * step, 4096, step},  // above half a count
		{math.Pi, 4, math.Pi},     // exactly on a count
		{1.0, 1 << 24, math.Round(1.0/(2*math.Pi/(1<<24))) * (2 * math.Pi / (1 << 24))},
	}
	for _, tc := range tests {
		if got := quantize(tc.in, tc.cpr); math.Abs(got-tc.want) > 1e-15 {
			t.Errorf("quantize(%g, %d) = %.17g, want %.17g", tc.in, tc.cpr, got, tc.want)
		}
	}
}

func TestSensorBank(t *testing.T) {
	tr := truth{joints: 2, angle: [protocol.MaxJoints]float64{0.1, -0.2}, rate: [protocol.MaxJoints]float64{1, -1},
		pitch: -0.05, pitchV: 0.3, normal: [2]float64{100, 4}, timeUS: 1000}
	t.Run("bias and switches", func(t *testing.T) {
		b := newSensorBank(SensorModel{AngleBias: 0.01, RateBias: -0.5, PitchBias: 0.02, ContactThreshold: 5}, nil, rand.New(rand.NewPCG(1, 1)))
		var out protocol.State
		b.read(0, &tr, &out)
		want := protocol.State{TimeUS: 1000, Joints: 2, IMUPitch: float32(-0.05 + 0.02), IMURate: 0.3, Contacts: protocol.ContactLeft}
		want.Angle[0], want.Angle[1] = float32(0.1+0.01), float32(-0.2+0.01)
		want.Rate[0], want.Rate[1] = 0.5, -1.5
		if out != want {
			t.Fatalf("read %+v, want %+v", out, want)
		}
	})
	t.Run("seeded noise repeats", func(t *testing.T) {
		read := func(seed uint64) protocol.State {
			b := newSensorBank(SensorModel{AngleNoise: 0.01, PitchRateNoise: 0.1}, nil, rand.New(rand.NewPCG(seed, 1)))
			var out protocol.State
			b.read(0, &tr, &out)
			b.read(0.001, &tr, &out)
			return out
		}
		a, b, c := read(5), read(5), read(6)
		if a != b {
			t.Fatal("the same seed gave different readings")
		}
		if a == c || a.Angle[0] == float32(tr.angle[0]) {
			t.Fatal("noise does not depend on the seed or is missing")
		}
		if a.Rate[0] != float32(tr.rate[0]) || a.IMUPitch != float32(tr.pitch) {
			t.Fatal("noise leaked into channels with zero sigma")
		}
	})
	t.Run("freeze holds", func(t *testing.T) {
		fz := []Freeze{{Sensor: "imu", Start: 0.001, Duration: 0.002, joint: -1}, {Sensor: "contacts", Start: 0.001, Duration: 0.002, joint: -1}}
		b := newSensorBank(SensorModel{ContactThreshold: 5}, fz, rand.New(rand.NewPCG(1, 1)))
		var first, out protocol.State
		b.read(0, &tr, &first)
		moved := tr
		moved.pitch, moved.normal = 0.4, [2]float64{0, 200}
		b.read(0.0015, &moved, &out)
		if out.IMUPitch != first.IMUPitch || out.Contacts != first.Contacts {
			t.Fatalf("frozen imu and contacts read %+v, want the held %+v", out, first)
		}
		b.read(0.004, &moved, &out)
		if out.IMUPitch != 0.4 || out.Contacts != protocol.ContactRight {
			t.Fatalf("after the freeze: %+v", out)
		}
	})
}

func TestActuatorChecks(t *testing.T) {
	tests := []struct {
		name      string
		joints    uint8
		torque    [2]float32
		bad       bool
		saturated bool
		target    [2]float64
	}{
		{"sound", 2, [2]float32{3, -4}, false, false, [2]float64{3, -4}},
		{"clipped", 2, [2]float32{30, -25}, false, true, [2]float64{20, -20}},
		{"NaN", 2, [2]float32{1, float32(math.NaN())}, true, false, [2]float64{}},
		{"+Inf", 2, [2]float32{float32(math.Inf(1)), 1}, true, false, [2]float64{}},
		{"beyond sanity", 2, [2]float32{2e4, 1}, true, false, [2]float64{}},
		{"wrong joint count", 3, [2]float32{1, 1}, true, false, [2]float64{}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			a, err := newActuatorBank(ActuatorModel{TorqueLimit: 20}, []string{"hip_left", "hip_right"}, 1e-3)
			if err != nil {
				t.Fatal(err)
			}
			a.target = [protocol.MaxJoints]float64{7, 7}
			a.applied = a.target
			c := protocol.Command{Joints: tc.joints}
			c.Torque[0], c.Torque[1] = tc.torque[0], tc.torque[1]
			chk := a.command(&c)
			if chk.bad != tc.bad || chk.saturated != tc.saturated {
				t.Fatalf("check %+v", chk)
			}
			got := a.step()
			if got[0] != tc.target[0] || got[1] != tc.target[1] {
				t.Fatalf("applied %v, want %v", got[:2], tc.target)
			}
		})
	}
	if _, err := newActuatorBank(ActuatorModel{JointLimits: map[string]float64{"knee": 5}}, []string{"hip"}, 1e-3); err == nil || !strings.Contains(err.Error(), "knee") {
		t.Fatalf("a limit for an unknown joint: %v", err)
	}
}

func TestMeasureLatencyReport(t *testing.T) {
	rep, err := MeasureLatencyInproc(context.Background(), 300, 1000, referenceFirmware)
	if err != nil {
		t.Fatal(err)
	}
	if rep.Ticks != 300 || rep.Latency.Count == 0 || rep.FreshRate <= 0 || rep.Outcome == "" {
		t.Fatalf("report %+v", rep)
	}
	s := rep.String()
	for _, want := range []string{"round trip", "tick jitter", "deadline misses", "300 ticks at 1000 Hz"} {
		if !strings.Contains(s, want) {
			t.Errorf("printout lacks %q:\n%s", want, s)
		}
	}
	t.Log("\n" + s)
}
