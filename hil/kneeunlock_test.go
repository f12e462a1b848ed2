package hil

import (
	"context"
	"slices"
	"strings"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/firmware/reference"
	"gaitrig/plant"
	"gaitrig/record"
)

// kneedDemo is the kneed demo walker (actuated, latched knees) at the
// level-demo start, in a lockstep run of the given simulated seconds.
// A right knee made passive by passiveRight keeps its latch.
func kneedDemo(t *testing.T, seconds float64, passiveRight ...bool) (*plant.Model, plant.State, Config) {
	t.Helper()
	_, _, cfg := timedDemo(t, seconds)
	cfg.Physics.IgnoreScuff = false
	cfg.Actuators.JointLimits = map[string]float64{"knee_left": 30, "knee_right": 30}
	p := reference.KneedDemoParams()
	if len(passiveRight) > 0 && passiveRight[0] {
		sh := *p.Legs[1].Shank
		sh.Actuated = false
		p.Legs[1].Shank = &sh
		delete(cfg.Actuators.JointLimits, "knee_right")
	}
	m, err := plant.New(p, cfg.Physics)
	if err != nil {
		t.Fatal(err)
	}
	ds := reference.DemoStart
	s, err := m.Stand(0, 0, ds.LegAngles, ds.TorsoAngle, ds.Rates[:]...)
	if err != nil {
		t.Fatal(err)
	}
	return m, s, cfg
}

// editedReference is the reference firmware driving all joints of m, with
// edit applied to each command it sends (nil: none): the state it answers
// and the config's joint names are at hand.
func editedReference(m *plant.Model, edit func(in *protocol.Message, names []string, out *protocol.Command)) firmwareFunc {
	return func(conn bridges.Conn) error {
		f, err := reference.New(reference.Options{Actuators: len(m.JointNames()), IdleTimeout: 5 * time.Second})
		if err != nil {
			return err
		}
		if err := conn.Send(f.Greeting()); err != nil {
			return err
		}
		var names []string
		var in protocol.Message
		for {
			if err := conn.Recv(time.Now().Add(5*time.Second), &in); err != nil {
				return err
			}
			if in.Type == protocol.TypeConfig {
				names = nil
				for i := 0; i < int(in.Config.Joints); i++ {
					names = append(names, in.Config.JointNames[i])
				}
			}
			ans, end, err := f.Handle(&in)
			if err != nil {
				return err
			}
			if ans != nil {
				if ans.Type == protocol.TypeCommand && edit != nil {
					edit(&in, names, &ans.Command)
				}
				if err := conn.Send(ans); err != nil {
					return err
				}
			}
			if end || in.Type == protocol.TypeStop {
				return nil
			}
		}
	}
}

// TestKneeUnlockCommand: in a lockstep run of the kneed demo walker under
// the reference law, the firmware flexes the stance knee with −3 N·m from
// state seq unlockSeq on. Held by its latch, the knee stays locked (the
// latch pulls). With the knee's unlock bit in the command that answers
// seq unlockSeq, the telemetry's knee_locked column of that knee turns
// false in exactly that tick's row (row index seq − 1), the knee flexes, no
// knee_buckle is raised, and every row before it is the same as without
// the bit.
func TestKneeUnlockCommand(t *testing.T) {
	const unlockSeq = 150 // mid-stance of the first step (our choice)
	const flexNM = -3     // N·m on the stance knee from unlockSeq on (our choice)
	m, s, cfg := kneedDemo(t, 0.2)
	stance := -1
	run := func(unlock bool) []record.Tick {
		edit := func(in *protocol.Message, names []string, c *protocol.Command) {
			if in.Type != protocol.TypeState || in.Seq < unlockSeq {
				return
			}
			if stance < 0 {
				switch in.State.Contacts & (protocol.ContactLeft | protocol.ContactRight) {
				case protocol.ContactLeft:
					stance = 0
				case protocol.ContactRight:
					stance = 1
				default:
					t.Errorf("seq %d: contacts %#x, want one foot down", in.Seq, in.State.Contacts)
					return
				}
			}
			j := slices.Index(names, "knee_"+record.FootNames[stance])
			c.Torque[j] = flexNM
			if unlock && in.Seq == unlockSeq {
				c.KneeUnlock = 1 << stance
			}
		}
		// A walker whose stance knee gives way may fall or lift a foot:
		// the run may end in an e-stop (the firmware then returns the
		// rig's stop as its error); its telemetry is complete either way.
		_, dir, err, _ := runWith(t, context.Background(), cfg, m, s, editedReference(m, edit))
		if err != nil {
			t.Fatal(err)
		}
		_, rows := readRun(t, dir)
		for _, e := range eventsOf(t, dir, AlarmKneeBuckle) {
			t.Errorf("unlock %v: %s at tick %d: a knee with a latch buckled", unlock, e.Message, e.Tick)
		}
		return rows
	}
	held := run(false)
	stance = -1
	freed := run(true)
	if stance < 0 {
		t.Fatal("the firmware never saw the unlock seq")
	}
	k := unlockSeq - 1 // the row of the tick that answers seq unlockSeq
	if len(held) <= k+10 || len(freed) <= k+5 {
		t.Fatalf("%d and %d rows, want more than %d and %d", len(held), len(freed), k+10, k+5)
	}
	for i := 0; i < k; i++ {
		if !sameRow(&held[i], &freed[i]) {
			t.Fatalf("row %d differs before the unlock", i)
		}
	}
	if !freed[k-1].Feet[stance].KneeLocked || freed[k].Feet[stance].KneeLocked {
		t.Fatalf("knee_locked_%s rows %d, %d: %v, %v; want true, then false in the unlock tick",
			record.FootNames[stance], k-1, k, freed[k-1].Feet[stance].KneeLocked, freed[k].Feet[stance].KneeLocked)
	}
	for i := k; i < k+10; i++ {
		if !held[i].Feet[stance].KneeLocked {
			t.Fatalf("row %d: without the unlock bit the latched knee unlocked (lock torque %g)", i, held[i].Feet[stance].KneeTorqueNM)
		}
	}
	if held[k].Feet[stance].KneeTorqueNM >= 0 {
		t.Errorf("row %d: lock torque of the latched knee %g under the flexing torque, want < 0 (the latch pulls)", k, held[k].Feet[stance].KneeTorqueNM)
	}
	thigh, shank := 2+stance, m.NumDOF()-2+stance // shanks come last in q
	if bend := freed[k+5].Q[shank] - freed[k+5].Q[thigh]; bend >= 0 {
		t.Errorf("row %d: knee angle %g after the unlock, want flexed (< 0)", k+5, bend)
	}
	t.Logf("%s knee unlocked at row %d (t = %.3f s); latched, its lock torque was %.3g N·m", record.FootNames[stance], k, freed[k].T, held[k].Feet[stance].KneeTorqueNM)
}

// TestKneeUnlockIgnored: bits the walker cannot honour change nothing. On
// the demo walker (no knees) a firmware that sets both knee bits and bit 7
// in every command gets telemetry identical, byte for byte, to a run
// without them, and one knee_unlock_ignored info event per bit; on the
// kneed walker, bit 7 alone likewise, and the bit of a latched knee
// without an actuator.
func TestKneeUnlockIgnored(t *testing.T) {
	cases := []struct {
		name  string
		bits  uint8
		want  []float64 // bits noted as ignored
		kneed bool
		why   string // in the first event's message
	}{
		{"no knees", protocol.UnlockKneeLeft | protocol.UnlockKneeRight | 0x80, []float64{0, 1, 7}, false, "has no knee"},
		{"kneed, no such knee", 0x80, []float64{7}, true, "names no knee"},
		{"kneed, passive right knee", protocol.UnlockKneeRight, []float64{1}, true, "the right knee has no actuator"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			m, s, cfg := timedDemo(t, 0.3)
			if tc.kneed {
				m, s, cfg = kneedDemo(t, 0.3, tc.bits == protocol.UnlockKneeRight)
			}
			_, base, err, ferr := runWith(t, context.Background(), cfg, m, s, editedReference(m, nil))
			if err != nil || ferr != nil {
				t.Fatal(err, ferr)
			}
			_, dir, err, ferr := runWith(t, context.Background(), cfg, m, s, editedReference(m, func(_ *protocol.Message, _ []string, c *protocol.Command) {
				c.KneeUnlock = tc.bits
			}))
			if err != nil || ferr != nil {
				t.Fatal(err, ferr)
			}
			if a, b := fileHash(t, base+"/"+record.TelemetryFile), fileHash(t, dir+"/"+record.TelemetryFile); a != b {
				t.Errorf("telemetry differs with ignored bits %#x", tc.bits)
			}
			ev := eventsOf(t, dir, kneeUnlockIgnored)
			var got []float64
			for _, e := range ev {
				if e.Severity != record.Info {
					t.Errorf("%s severity %s, want info", e.Kind, e.Severity)
				}
				got = append(got, e.Values["bit"])
				t.Log(e.Message)
			}
			if len(ev) > 0 && !strings.Contains(ev[0].Message, tc.why) {
				t.Errorf("message %q does not say %q", ev[0].Message, tc.why)
			}
			if !slices.Equal(got, tc.want) {
				t.Errorf("ignored bits noted %v, want %v once each", got, tc.want)
			}
		})
	}
}

// sameRow compares the plant and torque fields of two telemetry rows.
func sameRow(a, b *record.Tick) bool {
	return a.T == b.T && a.Q == b.Q && a.V == b.V && a.Applied == b.Applied && a.Feet == b.Feet && a.Angle == b.Angle
}
