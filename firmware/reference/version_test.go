package reference

import (
	"strings"
	"testing"
	"time"

	"gaitrig/bridges/protocol"
)

// A firmware speaks one protocol version: the default is the newest, 1 is
// a board of version 1, anything else is refused at New.
func TestFirmwareProtocolOption(t *testing.T) {
	for _, tc := range []struct {
		opt, want uint8
	}{{0, protocol.Version}, {1, 1}, {2, 2}} {
		f, err := New(Options{Protocol: tc.opt})
		if err != nil {
			t.Fatal(err)
		}
		g := f.Greeting()
		if f.Protocol() != tc.want || g.Version != tc.want || g.Greeting.Version != tc.want {
			t.Errorf("Protocol %d: firmware speaks %d, greets with header %d, payload %d; want %d",
				tc.opt, f.Protocol(), g.Version, g.Greeting.Version, tc.want)
		}
	}
	for _, v := range []uint8{protocol.Version + 1, 255} {
		if _, err := New(Options{Protocol: v}); err == nil || !strings.Contains(err.Error(), "speaks versions 1 to 2") {
			t.Errorf("Protocol %d: err %v, want a refusal naming the versions this build speaks", v, err)
		}
	}
}

func config(v uint8, watchdogUS uint32) *protocol.Message {
	m := &protocol.Message{Version: v, Type: protocol.TypeConfig, Config: protocol.Config{TickHz: 1000, Lockstep: true, Joints: 2, WatchdogUS: watchdogUS}}
	m.Config.JointNames[0], m.Config.JointNames[1] = "hip_left", "hip_right"
	m.Config.TorqueLimit[0], m.Config.TorqueLimit[1] = 40, 40
	return m
}

// A version-2 firmware keeps the watchdog its config announced; a
// version-1 firmware has none, drops frames of version 2 as a board that
// cannot decode them would, answers in its own version, and still reads a
// stop of any version (its layout never changes).
func TestFirmwareVersionsInHandle(t *testing.T) {
	f2, _ := New(Options{})
	if _, _, err := f2.Handle(config(2, 75000)); err != nil || !f2.Configured() || f2.Watchdog() != 75*time.Millisecond {
		t.Fatalf("v2 config: err %v, configured %v, watchdog %v; want 75 ms", err, f2.Configured(), f2.Watchdog())
	}

	f1, _ := New(Options{Protocol: 1})
	if ans, end, err := f1.Handle(config(2, 75000)); ans != nil || end || err != nil || f1.Configured() {
		t.Fatalf("a v1 firmware took a v2 config: answer %v, end %v, err %v", ans, end, err)
	}
	if _, _, err := f1.Handle(config(1, 0)); err != nil || !f1.Configured() || f1.Watchdog() != 0 {
		t.Fatalf("v1 config: err %v, configured %v, watchdog %v", err, f1.Configured(), f1.Watchdog())
	}
	st := &protocol.Message{Version: 1, Type: protocol.TypeState, Seq: 1, State: protocol.State{Joints: 2}}
	ans, _, _ := f1.Handle(st)
	if ans == nil || ans.Type != protocol.TypeCommand || ans.WireVersion() != 1 {
		t.Fatalf("a v1 state: answer %+v, want a command of version 1", ans)
	}
	st.Version = 2
	if ans, _, _ := f1.Handle(st); ans != nil {
		t.Errorf("a v1 firmware answered a v2 state: %+v", ans)
	}
	stop := &protocol.Message{Version: 2, Type: protocol.TypeStop, Stop: protocol.Stop{Reason: protocol.StopBadVersion, Text: "rig speaks v1-v2, firmware v1"}}
	if _, end, err := f1.Handle(stop); !end || err == nil {
		t.Errorf("a v1 firmware ignored a stop of version 2: end %v, err %v", end, err)
	}
}
