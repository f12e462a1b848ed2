package hil

import (
	"context"
	"encoding/json"
	"math"
	"math/rand/v2"
	"strings"
	"sync"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/record"
)

func TestLatencyFaultDelaysCommandsByWholeTicks(t *testing.T) {
	cfg, run := shortRun(t, 60)
	cfg.LinkFaults = []LinkFault{{Kind: FaultLatency, Fixed: 5 * time.Millisecond}}
	_, ticks, _ := run(cfg, scripted(seqTorque))
	for _, row := range ticks {
		k := row.Index
		if k < 5 {
			if row.Fresh || row.Commanded[0] != 0 {
				t.Fatalf("tick %d: a command arrived before the 5 ms latency passed (%g)", k, row.Commanded[0])
			}
			continue
		}
		// Tick k applies the answer to the state of tick k−5, sequence k−4.
		if want := float64(float32(k-4) * 1e-3); !row.Fresh || row.Commanded[0] != want {
			t.Fatalf("tick %d: commanded %g (fresh %v), want %g", k, row.Commanded[0], row.Fresh, want)
		}
	}
}

func TestDropFaultResendsAndKeepsLockstep(t *testing.T) {
	cfg, run := shortRun(t, 200)
	cfg.Resend = time.Millisecond
	cfg.LinkFaults = []LinkFault{{Kind: FaultDrop, Rate: 0.2}}
	res, ticks, _ := run(cfg, scripted(seqTorque))
	if res.Summary.Outcome != record.Pass {
		t.Fatalf("outcome %s (%s)", res.Summary.Outcome, res.Summary.Reason)
	}
	l := res.Link
	if l.DroppedStates == 0 || l.DroppedCommand == 0 || l.Resends < l.DroppedStates {
		t.Fatalf("counts %+v", l)
	}
	for _, row := range ticks {
		// Lockstep: every tick still gets the answer to its own state.
		if want := float64(float32(row.Index+1) * 1e-3); row.Commanded[0] != want {
			t.Fatalf("tick %d: commanded %g, want %g", row.Index, row.Commanded[0], want)
		}
	}
	t.Logf("%d states and %d commands dropped, %d resends, %d stale", l.DroppedStates, l.DroppedCommand, l.Resends, l.StaleCommands)
}

func TestCorruptFaultIsABadFrame(t *testing.T) {
	cfg, run := shortRun(t, 200)
	cfg.Resend = time.Millisecond
	cfg.LinkFaults = []LinkFault{{Kind: FaultCorrupt, Rate: 0.1, From: 0.05}}
	res, _, dir := run(cfg, scripted(seqTorque))
	if res.Link.Corrupted == 0 || res.Link.BadFrames != res.Link.Corrupted {
		t.Fatalf("counts %+v", res.Link)
	}
	if uint64(res.Summary.Alarms[AlarmBadFrame]) != res.Link.BadFrames {
		t.Fatalf("alarms %v for %d bad frames", res.Summary.Alarms, res.Link.BadFrames)
	}
	ev := eventsOf(t, dir, AlarmBadFrame)
	if len(ev) == 0 || ev[0].T < 0.05 {
		t.Fatalf("bad_frame events %+v: want at least one, none before from_s", ev)
	}
}

func TestFreezeHoldsOneSensor(t *testing.T) {
	cfg, run := shortRun(t, 80)
	cfg.Freezes = []Freeze{{Sensor: "hip_left", Start: 0.020, Duration: 0.030}}
	_, ticks, _ := run(cfg, referenceFirmware)
	held := ticks[19].Angle[0] // row 19: state sent at t = 0.019, the last before the freeze
	frozen := 0
	for _, row := range ticks {
		start := row.T - 1e-3 // readings are taken at the tick's start
		in := start >= 0.020-1e-9 && start < 0.050-1e-9
		if in {
			frozen++
			if row.Angle[0] != held || row.Rate[0] != ticks[19].Rate[0] {
				t.Fatalf("tick %d inside the freeze reads %g, want the held %g", row.Index, row.Angle[0], held)
			}
		}
	}
	if frozen != 30 {
		t.Fatalf("%d frozen ticks, want 30", frozen)
	}
	if ticks[55].Angle[0] == held {
		t.Fatal("the sensor stayed frozen after the freeze ended")
	}
	if ticks[30].Angle[1] == ticks[19].Angle[1] {
		t.Fatal("hip_right froze too")
	}
}

func TestSaturationAndLag(t *testing.T) {
	cfg, run := shortRun(t, 100)
	cfg.Actuators = ActuatorModel{TorqueLimit: 20, Lag: 0.01}
	res, ticks, dir := run(cfg, scripted(func(seq uint32, c *protocol.Command) { c.Torque[0] = 100 }))
	for _, row := range ticks {
		// First-order lag toward the clipped 20 N·m; the command answering
		// tick k is applied over tick k (lockstep), k+1 lag steps so far.
		want := 20 * (1 - math.Pow(math.Exp(-1e-3/0.01), float64(row.Index+1)))
		if math.Abs(row.Applied[0]-want) > 1e-9 {
			t.Fatalf("tick %d: applied %.12g, want %.12g", row.Index, row.Applied[0], want)
		}
	}
	if n := res.Summary.Alarms[AlarmTorqueSaturation]; n != 1 {
		t.Fatalf("%d torque_saturation alarms for one continuous episode, want 1", n)
	}
	ev := eventsOf(t, dir, AlarmTorqueSaturation)
	if len(ev) != 1 || ev[0].Values["limit_nm"] != 20 || ev[0].Values["torque_nm"] != 100 {
		t.Fatalf("events %+v", ev)
	}
}

func TestPushImpulseOverOneTick(t *testing.T) {
	cfg, run := shortRun(t, 40)
	cfg.Pushes = []Push{{At: 0.0105, Impulse: [2]float64{5, 0}}}
	_, ticks, _ := run(cfg, referenceFirmware)
	for _, row := range ticks {
		want := 0.0
		if row.Index == 10 { // the tick from 0.010 to 0.011 holds 0.0105
			want = 5 / 1e-3
		}
		if math.Abs(row.Push[0]-want) > 1e-6 {
			t.Fatalf("tick %d push %g N, want %g", row.Index, row.Push[0], want)
		}
	}
}

// notifyConn is a link that reports link events the test feeds it.
type notifyConn struct {
	bridges.Conn
	ev chan bridges.LinkEvent
}

func (n *notifyConn) Events() <-chan bridges.LinkEvent { return n.ev }

func TestLinkEventsBecomeAlarms(t *testing.T) {
	tests := []struct {
		name    string
		gap     time.Duration
		outcome record.Outcome
	}{
		{"short gap warns", 10 * time.Millisecond, record.Pass},
		{"gap beyond the watchdog trips", 5 * time.Second, record.Tripped},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			m, s, cfg := timedDemo(t, 0.1)
			cfg.Severity = map[string]Severity{AlarmLinkLost: SeverityWarn}
			withEvents := func(rig bridges.Conn) bridges.Conn {
				conn := &notifyConn{Conn: rig, ev: make(chan bridges.LinkEvent, 4)}
				conn.ev <- bridges.LinkEvent{Kind: "disconnected", Err: errTest("serial port unplugged")}
				conn.ev <- bridges.LinkEvent{Kind: "reconnected", Gap: tc.gap}
				return conn
			}
			// The firmware's own error is not checked: after a trip the
			// reference firmware reports the rig's stop.
			res, dir, err, _ := runWrapped(t, context.Background(), cfg, m, s, withEvents, referenceFirmware)
			if err != nil {
				t.Fatal(err)
			}
			if res.Summary.Outcome != tc.outcome {
				t.Fatalf("outcome %s (%s), want %s", res.Summary.Outcome, res.Summary.Reason, tc.outcome)
			}
			lost := eventsOf(t, dir, AlarmLinkLost)
			back := eventsOf(t, dir, AlarmLinkRestored)
			if len(lost) != 1 || len(back) != 1 || back[0].Values["gap_ms"] != float64(tc.gap)/1e6 {
				t.Fatalf("link_lost %+v, link_restored %+v", lost, back)
			}
			if tc.outcome == record.Tripped && res.Summary.Alarms[AlarmWatchdog] != 1 {
				t.Fatalf("alarms %v: the long gap must trip the watchdog", res.Summary.Alarms)
			}
		})
	}
}

type errTest string

func (e errTest) Error() string { return string(e) }

// sink collects alarms as the MQTT link would publish them.
type sink struct {
	mu   sync.Mutex
	msgs [][]byte
}

func (s *sink) PublishAlarm(b []byte) error {
	s.mu.Lock()
	defer s.mu.Unlock()
	s.msgs = append(s.msgs, append([]byte(nil), b...))
	return nil
}

func TestFirmwareFaultAndStopWithAlarmSink(t *testing.T) {
	cfg, run := shortRun(t, 500)
	var sk sink
	cfg.Alarms = &sk
	cfg.Severity = map[string]Severity{AlarmFirmwareFault: SeverityWarn}
	// Answers with the fault status bit set from state 20 on, stops itself
	// with a motor driver fault at state 50 and answers nothing after.
	stopped := false
	fw := hooked(func(conn bridges.Conn, seq uint32, c *protocol.Command) bool {
		if stopped {
			return false
		}
		if seq == 50 {
			stopped = true
			stop := protocol.Message{Type: protocol.TypeStop, Stop: protocol.Stop{Reason: protocol.StopFirmware, Text: "motor driver fault"}}
			conn.Send(&stop)
			return false
		}
		if seq >= 20 {
			c.Status = protocol.StatusFault
		}
		return true
	}, nil)
	res, _, dir := run(cfg, fw)
	if res.Summary.Outcome != record.Fail || res.Summary.Ticks != 49 {
		t.Fatalf("outcome %s after %d ticks (%s): want fail at tick 49", res.Summary.Outcome, res.Summary.Ticks, res.Summary.Reason)
	}
	ev := eventsOf(t, dir, AlarmFirmwareFault)
	if len(ev) != 2 {
		t.Fatalf("firmware_fault events %+v: want the status bit's rising edge and the stop", ev)
	}
	if len(sk.msgs) != 2 {
		t.Fatalf("sink got %d alarms, want 2", len(sk.msgs))
	}
	for _, b := range sk.msgs {
		var v map[string]any
		if err := json.Unmarshal(b, &v); err != nil || v["kind"] != AlarmFirmwareFault || v["message"] == "" {
			t.Fatalf("sink payload %s: %v", b, err)
		}
	}
}

// downOnceConn reports the peer gone once, as the serial link does on an
// unplug, without link events of its own.
type downOnceConn struct {
	bridges.Conn
	n, at int
}

func (d *downOnceConn) Recv(deadline time.Time, m *protocol.Message) error {
	d.n++
	switch d.n {
	case d.at:
		return &wrapped{bridges.ErrDisconnected}
	case d.at + 1:
		return errTest("read /dev/ttyUSB0: input/output error") // unclassified: the same outage
	}
	return d.Conn.Recv(deadline, m)
}

type wrapped struct{ err error }

func (w *wrapped) Error() string { return "serial port went away: " + w.err.Error() }
func (w *wrapped) Unwrap() error { return w.err }

func TestDisconnectedRecvRaisesLinkLostAndWaits(t *testing.T) {
	for _, clock := range []ClockMode{Lockstep, Wallclock} {
		t.Run(string(clock), func(t *testing.T) {
			m, s, cfg := timedDemo(t, 0.1)
			cfg.Clock = clock
			cfg.Watchdog = time.Second
			cfg.Severity = map[string]Severity{AlarmLinkLost: SeverityWarn}
			// Recv number 3 is the one after the greeting and the first
			// state's command in lockstep; any early one will do.
			downOnce := func(rig bridges.Conn) bridges.Conn { return &downOnceConn{Conn: rig, at: 3} }
			res, _, err, _ := runWrapped(t, context.Background(), cfg, m, s, downOnce, referenceFirmware)
			if err != nil {
				t.Fatal(err)
			}
			if res.Summary.Outcome != record.Pass || res.Summary.Ticks != 100 {
				t.Fatalf("outcome %s after %d ticks (%s)", res.Summary.Outcome, res.Summary.Ticks, res.Summary.Reason)
			}
			if res.Summary.Alarms[AlarmLinkLost] != 1 {
				t.Fatalf("alarms %v: want one link_lost for the outage", res.Summary.Alarms)
			}
		})
	}
}

// A firmware that answers with seeded garbage (random message types,
// sequence numbers, joint counts, torques including NaN, Inf and huge
// values, status bits) never crashes the loop, and the run folder stays
// complete and consistent with the result.
func TestGarbageFirmwareLeavesCompleteRecord(t *testing.T) {
	for _, clock := range []ClockMode{Lockstep, Wallclock} {
		t.Run(string(clock), func(t *testing.T) {
			cfg, run := shortRun(t, 300)
			cfg.Clock = clock
			cfg.Watchdog = time.Second
			cfg.Severity = map[string]Severity{}
			for _, k := range AlarmKinds {
				cfg.Severity[k] = SeverityWarn // see everything, trip on nothing
			}
			rng := rand.New(rand.NewPCG(42, 1))
			values := []float32{0, 1, -1, 59, 61, 1e30, float32(math.NaN()), float32(math.Inf(1)), float32(math.Inf(-1))}
			types := []protocol.Type{protocol.TypeCommand, protocol.TypeCommand, protocol.TypeCommand, protocol.TypeHeartbeat,
				protocol.TypeGreeting, protocol.TypeConfig, protocol.TypeState, protocol.Type(0x77)}
			fw := func(conn bridges.Conn) error {
				if _, err := greet(conn, 2, protocol.Version); err != nil {
					return err
				}
				_, err := untilStop(conn, func(in *protocol.Message) {
					if in.Type != protocol.TypeState {
						return
					}
					for n := rng.IntN(4); n >= 0; n-- {
						out := protocol.Message{Type: types[rng.IntN(len(types))], Seq: in.Seq}
						if rng.IntN(3) == 0 {
							out.Seq = rng.Uint32()
						}
						out.Command.Joints = uint8(rng.IntN(4))
						if rng.IntN(2) == 0 {
							out.Command.Joints = 2
						}
						for j := range out.Command.Torque {
							out.Command.Torque[j] = values[rng.IntN(len(values))]
						}
						out.Command.Status = uint16(rng.IntN(4))
						conn.Send(&out)
					}
				})
				return err
			}
			res, ticks, dir := run(cfg, fw)
			if int64(len(ticks)) != res.Summary.Ticks {
				t.Fatalf("%d rows for %d ticks", len(ticks), res.Summary.Ticks)
			}
			for _, row := range ticks {
				for j := 0; j < 2; j++ {
					a := row.Applied[j]
					if math.IsNaN(a) || math.IsInf(a, 0) || math.Abs(a) > 60 {
						t.Fatalf("tick %d applied %g N·m: garbage reached the plant", row.Index, a)
					}
				}
			}
			if res.Link.BadTorques == 0 || len(eventsOf(t, dir, AlarmBadTorque)) == 0 {
				t.Fatalf("no bad torque seen in %+v", res.Link)
			}
			t.Logf("%s: %s after %d ticks; alarms %v; link %+v", clock, res.Summary.Outcome, res.Summary.Ticks, res.Summary.Alarms, res.Link)
		})
	}
}

// stuckSink never returns from its first publish until released, then fails.
type stuckSink struct{ release chan struct{} }

func (s *stuckSink) PublishAlarm([]byte) error {
	<-s.release
	return errTest("broker gone")
}

// A sink that hangs does not hold up the loop: the run ends, the record has
// every alarm, and the log says the sink lagged.
func TestStuckAlarmSinkDoesNotBlockTheLoop(t *testing.T) {
	cfg, run := shortRun(t, 300)
	sk := &stuckSink{release: make(chan struct{})}
	defer close(sk.release)
	cfg.Alarms = sk
	cfg.Severity = map[string]Severity{AlarmBadTorque: SeverityWarn}
	cfg.AlarmInterval = 1e-9 // log every occurrence
	var logs []string
	cfg.Log = func(l string) { logs = append(logs, l) }
	start := time.Now()
	res, _, dir := run(cfg, scripted(func(seq uint32, c *protocol.Command) {
		if seq%10 == 0 {
			c.Torque[0] = float32(math.NaN())
		}
	}))
	if res.Summary.Ticks != 300 {
		t.Fatalf("%d ticks (%s)", res.Summary.Ticks, res.Summary.Reason)
	}
	if n := len(eventsOf(t, dir, AlarmBadTorque)); n != 30 {
		t.Fatalf("%d bad_torque lines in the record, want 30", n)
	}
	joined := strings.Join(logs, "\n")
	if !strings.Contains(joined, "alarm sink still busy") {
		t.Fatalf("log does not mention the stuck sink:\n%s", joined)
	}
	t.Logf("run with a stuck sink took %v", time.Since(start).Round(time.Millisecond))
}

// A firmware that missed the configuration greets again and gets it again,
// with no alarm; one that restarts mid-run (greets after answering) raises
// firmware_reset (a warning here, set by the test) and is configured again.
func TestGreetingAfterHandshake(t *testing.T) {
	tests := []struct {
		name      string
		restartAt uint32 // 0: lose the first configuration instead
		alarms    int
	}{
		{"configuration lost", 0, 0},
		{"restart mid-run", 100, 1},
	}
	for _, tc := range tests {
		for _, clock := range []ClockMode{Lockstep, Wallclock} {
			t.Run(tc.name+"/"+string(clock), func(t *testing.T) {
				cfg, run := shortRun(t, 300)
				cfg.Clock = clock
				cfg.Watchdog = time.Second
				cfg.Severity = map[string]Severity{AlarmFirmwareReset: SeverityWarn}
				fw := func(conn bridges.Conn) error {
					if tc.restartAt == 0 {
						if _, err := greet(conn, 2, protocol.Version); err != nil {
							return err // this configuration is "lost": greet again
						}
					}
					restarted := false
					return hooked(func(conn bridges.Conn, seq uint32, _ *protocol.Command) bool {
						if seq == tc.restartAt && !restarted {
							restarted = true
							greet(conn, 2, protocol.Version) // reboot: greet, wait for the configuration
							return false
						}
						return true
					}, nil)(conn)
				}
				res, _, _ := run(cfg, fw)
				if res.Summary.Ticks != 300 || res.Summary.Outcome == record.Tripped || res.Summary.Outcome == record.Aborted {
					t.Fatalf("%s after %d ticks (%s)", res.Summary.Outcome, res.Summary.Ticks, res.Summary.Reason)
				}
				if n := res.Summary.Alarms[AlarmFirmwareReset]; n != tc.alarms {
					t.Fatalf("%d firmware_reset alarms, want %d", n, tc.alarms)
				}
				if n := res.Summary.Alarms[AlarmFirmwareFault]; n != 0 {
					t.Fatalf("%d firmware_fault alarms: a restart is firmware_reset", n)
				}
			})
		}
	}
}

// stallConn oversleeps some Recv deadlines by 100 ms, as a rig process that
// the host did not run for a while would.
type stallConn struct {
	bridges.Conn
	n int
}

func (s *stallConn) Recv(deadline time.Time, m *protocol.Message) error {
	s.n++
	if s.n >= 5 && s.n < 8 && time.Until(deadline) > 0 {
		time.Sleep(time.Until(deadline) + 100*time.Millisecond)
		return bridges.ErrTimeout
	}
	return s.Conn.Recv(deadline, m)
}

// A stall of the rig's own process is not firmware silence: with a 30 ms
// watchdog, three 100 ms stalls of the rig do not trip it, while a silent
// firmware still does (TestWatchdogTripsOnSilentFirmware).
func TestLockstepWatchdogIgnoresRigStalls(t *testing.T) {
	m, s, cfg := timedDemo(t, 0.05)
	cfg.Watchdog = 30 * time.Millisecond
	cfg.Resend = time.Second // no resends: only the stall logic can save the run
	rig, fw := inprocPair()
	defer rig.Close()
	go referenceFirmware(fw)
	res, err := Run(context.Background(), cfg, m, s, &stallConn{Conn: rig}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if res.Summary.Outcome != record.Pass || res.Summary.Alarms[AlarmWatchdog] != 0 {
		t.Fatalf("%s (%s), alarms %v", res.Summary.Outcome, res.Summary.Reason, res.Summary.Alarms)
	}
}

// staleAfterStallConn stalls the rig once, inside the Send of state 50, for
// longer than the watchdog, and then hands the loop a stale command before
// the firmware's real answer, as a buffer holding an answer to a resent
// state would.
type staleAfterStallConn struct {
	bridges.Conn
	stall time.Duration
	stale bool
}

func (s *staleAfterStallConn) Send(m *protocol.Message) error {
	err := s.Conn.Send(m)
	if m.Type == protocol.TypeState && m.Seq == 50 {
		time.Sleep(s.stall)
		s.stale = true
	}
	return err
}

func (s *staleAfterStallConn) Recv(deadline time.Time, m *protocol.Message) error {
	if s.stale {
		s.stale = false
		*m = protocol.Message{Type: protocol.TypeCommand, Seq: 49}
		m.Command.Joints = 2
		return nil
	}
	return s.Conn.Recv(deadline, m)
}

// floodStaleConn, once the rig sends its first state, answers every Recv at
// once with a stale command, as a firmware flooding the link with answers
// to old states faster than the rig reads would: no Recv ever waits.
type floodStaleConn struct {
	bridges.Conn
	flooding bool
}

func (f *floodStaleConn) Send(m *protocol.Message) error {
	if m.Type == protocol.TypeState {
		f.flooding = true
	}
	return f.Conn.Send(m)
}

func (f *floodStaleConn) Recv(deadline time.Time, m *protocol.Message) error {
	if !f.flooding {
		return f.Conn.Recv(deadline, m)
	}
	*m = protocol.Message{Type: protocol.TypeCommand, Seq: 0}
	m.Command.Joints = 2
	return nil
}

// Past the watchdog after a stall of the rig, the loop reads through what is
// already waiting: a stale answer ahead of the valid one does not trip the
// watchdog. A link that never stops delivering stale answers still trips it.
func TestLockstepWatchdogReadsPastStaleAfterStall(t *testing.T) {
	t.Run("stale then valid", func(t *testing.T) {
		m, s, cfg := timedDemo(t, 0.1)
		cfg.Watchdog = 30 * time.Millisecond
		cfg.Resend = time.Second
		rig, fw := inprocPair()
		defer rig.Close()
		go referenceFirmware(fw)
		res, err := Run(context.Background(), cfg, m, s, &staleAfterStallConn{Conn: rig, stall: 60 * time.Millisecond}, nil)
		if err != nil {
			t.Fatal(err)
		}
		if res.Summary.Outcome != record.Pass || res.Summary.Alarms[AlarmWatchdog] != 0 || res.Link.StaleCommands == 0 {
			t.Fatalf("%s (%s), alarms %v, link %+v", res.Summary.Outcome, res.Summary.Reason, res.Summary.Alarms, res.Link)
		}
	})
	t.Run("endless stale flood", func(t *testing.T) {
		m, s, cfg := timedDemo(t, 0.1)
		cfg.Watchdog = 30 * time.Millisecond
		rig, fw := inprocPair()
		defer rig.Close()
		go referenceFirmware(fw)
		cfg.pressure = quietHost // the verdict on a flood must not depend on the host's load
		res, err := Run(context.Background(), cfg, m, s, &floodStaleConn{Conn: rig}, nil)
		if err != nil {
			t.Fatal(err)
		}
		if res.Summary.Outcome != record.Tripped || res.Summary.Alarms[AlarmWatchdog] != 1 {
			t.Fatalf("%s (%s), alarms %v: want a watchdog trip", res.Summary.Outcome, res.Summary.Reason, res.Summary.Alarms)
		}
	})
}
