package reference

import (
	"errors"
	"math"
	"testing"
	"time"

	"gaitrig/bridges/inproc"
	"gaitrig/bridges/protocol"
)

// rigSide plays the rig over an in-process link: greeting check, config,
// a few states, then a stop with the given reason.
func TestServeSpeaksTheProtocol(t *testing.T) {
	tests := []struct {
		name    string
		stop    uint8
		wantErr error
	}{
		{"normal end", protocol.StopEnd, nil},
		{"e-stop", protocol.StopEStop, ErrRigStopped},
		{"watchdog", protocol.StopWatchdog, ErrRigStopped},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			rig, fw := inproc.Pair()
			defer rig.Close()
			done := make(chan error, 1)
			go func() { done <- Serve(fw, Options{IdleTimeout: 2 * time.Second}) }()
			var m protocol.Message
			if err := rig.Recv(time.Now().Add(2*time.Second), &m); err != nil || m.Type != protocol.TypeGreeting {
				t.Fatalf("first message %v, type %#x: want a greeting", err, m.Type)
			}
			if m.Greeting.Version != protocol.Version || m.Greeting.Actuators != 2 || m.Greeting.Name == "" {
				t.Fatalf("greeting %+v", m.Greeting)
			}
			cfg := protocol.Message{Type: protocol.TypeConfig}
			cfg.Config = protocol.Config{TickHz: 1000, Lockstep: true, Joints: 2, TorqueLimit: [protocol.MaxJoints]float32{30, 30}}
			rig.Send(&cfg)
			// A torso pitched 0.3 rad back with the left foot down: the
			// stance hip must pull the torso forward, clipped at the rig's
			// 30 N·m, which the firmware adopts.
			st := protocol.Message{Type: protocol.TypeState}
			st.State = protocol.State{Joints: 2, Angle: [protocol.MaxJoints]float32{0.1, -0.4}, IMUPitch: 0.3, Contacts: protocol.ContactLeft}
			for seq := uint32(1); seq <= 3; seq++ {
				st.Seq = seq
				rig.Send(&st)
				if err := rig.Recv(time.Now().Add(2*time.Second), &m); err != nil {
					t.Fatal(err)
				}
				if m.Type != protocol.TypeCommand || m.Seq != seq || m.Command.Joints != 2 {
					t.Fatalf("answer to state %d: %+v", seq, m)
				}
			}
			r := Reading{Joints: 2, Angle: [2]float64{float64(float32(0.1)), float64(float32(-0.4))}, Pitch: float64(float32(0.3)), Contacts: 1}
			g := DefaultGains()
			g.TorqueLimit = 30
			var want [2]float64
			Law(&g, &r, want[:])
			for i := 0; i < 2; i++ {
				if m.Command.Torque[i] != float32(want[i]) {
					t.Errorf("torque %d = %g, the law gives %g", i, m.Command.Torque[i], want[i])
				}
			}
			if math.Abs(float64(m.Command.Torque[0])) != 30 {
				t.Errorf("stance torque %g: want clipped at the rig's 30 N·m", m.Command.Torque[0])
			}
			// A non-finite reading: zero torque and the fault bit.
			st.Seq = 4
			st.State.IMURate = float32(math.NaN())
			rig.Send(&st)
			if err := rig.Recv(time.Now().Add(2*time.Second), &m); err != nil {
				t.Fatal(err)
			}
			if m.Command.Status != protocol.StatusFault || m.Command.Torque[0] != 0 || m.Command.Torque[1] != 0 {
				t.Fatalf("answer to a NaN reading: %+v", m.Command)
			}
			stop := protocol.Message{Type: protocol.TypeStop, Stop: protocol.Stop{Reason: tc.stop, Text: "test"}}
			rig.Send(&stop)
			select {
			case err := <-done:
				if !errors.Is(err, tc.wantErr) || (tc.wantErr == nil && err != nil) {
					t.Fatalf("Serve returned %v, want %v", err, tc.wantErr)
				}
			case <-time.After(20 * time.Second): // a bound on a hang
				t.Fatal("Serve did not return after the stop")
			}
		})
	}
}

// The firmware adopts the smallest torque limit the rig configures; a
// joint the rig leaves unlimited (limit 0) does not hide the others'.
func TestHandleAdoptsTheRigsLimit(t *testing.T) {
	tests := []struct {
		name   string
		limits [2]float32
		want   float64
	}{
		{"both limited", [2]float32{30, 40}, 30},
		{"first unlimited", [2]float32{0, 30}, 30},
		{"second unlimited", [2]float32{30, 0}, 30},
		{"none limited", [2]float32{0, 0}, DefaultGains().TorqueLimit},
		{"above the firmware's own", [2]float32{80, 90}, DefaultGains().TorqueLimit},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			f, err := New(Options{})
			if err != nil {
				t.Fatal(err)
			}
			cfg := protocol.Message{Type: protocol.TypeConfig}
			cfg.Config = protocol.Config{TickHz: 1000, Lockstep: true, Joints: 2}
			copy(cfg.Config.TorqueLimit[:], tc.limits[:])
			if _, end, err := f.Handle(&cfg); end || err != nil {
				t.Fatalf("config refused: end %v, %v", end, err)
			}
			if f.g.TorqueLimit != tc.want {
				t.Fatalf("firmware torque limit %g N·m, want %g", f.g.TorqueLimit, tc.want)
			}
		})
	}
}

func TestServeRefusesAndTimesOut(t *testing.T) {
	t.Run("joint count mismatch", func(t *testing.T) {
		rig, fw := inproc.Pair()
		defer rig.Close()
		done := make(chan error, 1)
		// The idle timeout and the waits bound a hang; none is judged.
		go func() { done <- Serve(fw, Options{IdleTimeout: 20 * time.Second}) }()
		var m protocol.Message
		rig.Recv(time.Now().Add(20*time.Second), &m)
		cfg := protocol.Message{Type: protocol.TypeConfig, Config: protocol.Config{Joints: 3}}
		rig.Send(&cfg)
		if err := rig.Recv(time.Now().Add(20*time.Second), &m); err != nil || m.Type != protocol.TypeStop || m.Stop.Reason != protocol.StopFirmware {
			t.Fatalf("want a firmware stop, got %v %+v", err, m)
		}
		if err := <-done; err == nil {
			t.Fatal("Serve accepted 3 joints")
		}
	})
	t.Run("silent rig", func(t *testing.T) {
		rig, fw := inproc.Pair()
		defer rig.Close()
		err := Serve(fw, Options{IdleTimeout: 20 * time.Millisecond})
		if err == nil {
			t.Fatal("Serve returned nil although the rig never answered")
		}
		t.Log(err)
	})
	t.Run("closed link", func(t *testing.T) {
		rig, fw := inproc.Pair()
		rig.Close()
		if err := Serve(fw, Options{}); err == nil {
			t.Fatal("Serve returned nil on a closed link")
		}
	})
}

func TestGainsFromSettings(t *testing.T) {
	tests := []struct {
		name     string
		settings map[string]float64
		ok       bool
		check    func(g Gains) bool
	}{
		{"none", nil, true, func(g Gains) bool { return g == DefaultGains() }},
		{"target speed", map[string]float64{"target_speed_mps": 0.6}, true, func(g Gains) bool { return g.TargetSpeed == 0.6 }},
		{"unknown name", map[string]float64{"speed": 1}, false, nil},
		{"crossed step bounds", map[string]float64{"step_min_rad": 0.5, "step_max_rad": 0.2}, false, nil},
		{"zero limit", map[string]float64{"firmware_torque_limit_nm": 0}, false, nil},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			g, err := GainsFromSettings(tc.settings)
			if (err == nil) != tc.ok {
				t.Fatalf("error %v, want ok %v", err, tc.ok)
			}
			if tc.check != nil && !tc.check(g) {
				t.Fatalf("gains %+v", g)
			}
		})
	}
}

func TestStanceChoice(t *testing.T) {
	tests := []struct {
		contacts uint8
		th, w    [2]float64
		want     int
	}{
		{1, [2]float64{0, 0}, [2]float64{0, 0}, 0},
		{2, [2]float64{0, 0}, [2]float64{0, 0}, 1},
		{3, [2]float64{-0.2, 0.2}, [2]float64{0, 0}, 1}, // right leg ahead has just landed
		{3, [2]float64{0.2, -0.2}, [2]float64{0, 0}, 0},
		{0, [2]float64{0, 0}, [2]float64{1, -0.8}, 1}, // no switch: the leg rotating back
		{0, [2]float64{0, 0}, [2]float64{-0.8, 1}, 0},
	}
	for _, tc := range tests {
		if got := pickStance(tc.contacts, tc.th, tc.w); got != tc.want {
			t.Errorf("contacts %d, θ %v, ω %v: stance %d, want %d", tc.contacts, tc.th, tc.w, got, tc.want)
		}
	}
}

// The law is a pure function: the same reading gives the same torques,
// whatever came before.
func TestLawIsPure(t *testing.T) {
	g := DefaultGains()
	a := Reading{Joints: 2, Angle: [2]float64{0.2, -0.3}, Rate: [2]float64{-1, 2}, Pitch: -0.1, PitchRate: 0.2, Contacts: 1}
	b := Reading{Joints: 2, Angle: [2]float64{-0.3, 0.2}, Rate: [2]float64{3, -1}, Pitch: 0.2, Contacts: 2}
	var t1, t2, tb [2]float64
	Law(&g, &a, t1[:])
	Law(&g, &b, tb[:])
	Law(&g, &a, t2[:])
	if t1 != t2 {
		t.Fatalf("same reading, different torques: %v then %v", t1, t2)
	}
	if n := testing.AllocsPerRun(100, func() { Law(&g, &a, t1[:]) }); n != 0 {
		t.Fatalf("Law allocates %.0f times", n)
	}
}

// Compass walker: the single hip torque acts +τ on the right leg and −τ on
// the left, so the law flips its sign when the left leg swings.
func TestCompassLawSigns(t *testing.T) {
	g := DefaultGains()
	tests := []struct {
		name     string
		contacts uint8
		pitch    float64 // left leg angle (IMU on the left leg)
		hip      float64 // θ_right − θ_left
		sign     float64
	}{
		{"right leg swings from behind", protocol.ContactLeft, 0.2, -0.4, +1},
		{"left leg swings from behind", protocol.ContactRight, -0.2, 0.4, -1},
	}
	for _, tc := range tests {
		r := Reading{Joints: 1, Angle: [2]float64{tc.hip}, Pitch: tc.pitch, Contacts: tc.contacts}
		var tau [1]float64
		Law(&g, &r, tau[:])
		if tau[0]*tc.sign <= 0 {
			t.Errorf("%s: hip torque %g, want sign %+g", tc.name, tau[0], tc.sign)
		}
	}
}

// A rig that starts listening late still gets a greeting: Serve repeats it
// until the configuration arrives, and stops repeating afterwards.
func TestServeRepeatsGreetingUntilConfigured(t *testing.T) {
	rig, fw := inproc.Pair()
	defer rig.Close()
	done := make(chan error, 1)
	// The idle timeout and the deadline bound a hang on a busy host; the
	// test counts greetings, it does not time them.
	go func() { done <- Serve(fw, Options{IdleTimeout: 20 * time.Second}) }()
	var m protocol.Message
	greetings := 0
	deadline := time.Now().Add(20 * time.Second)
	for greetings < 3 {
		if err := rig.Recv(deadline, &m); err != nil {
			t.Fatalf("after %d greetings: %v", greetings, err)
		}
		if m.Type == protocol.TypeGreeting {
			greetings++
		}
	}
	cfg := protocol.Message{Type: protocol.TypeConfig, Config: protocol.Config{Joints: 2, TickHz: 1000}}
	rig.Send(&cfg)
	// A state's answer shows the config has landed: greetings before it
	// may have been sent before; after it, silence. (A busy host can only
	// hide a greeting in that window, never make one up.)
	st := protocol.Message{Type: protocol.TypeState, Seq: 1, State: protocol.State{Joints: 2}}
	rig.Send(&st)
	for {
		if err := rig.Recv(time.Now().Add(20*time.Second), &m); err != nil {
			t.Fatalf("no answer to the first state: %v", err)
		}
		if m.Type == protocol.TypeCommand {
			break
		}
	}
	if err := rig.Recv(time.Now().Add(3*GreetEvery), &m); err == nil {
		t.Fatalf("got a %#x after the first state was answered, want silence until the next state", m.Type)
	}
	stop := protocol.Message{Type: protocol.TypeStop}
	rig.Send(&stop)
	if err := <-done; err != nil {
		t.Fatal(err)
	}
}
