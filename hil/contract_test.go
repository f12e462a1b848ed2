package hil

// Tests of the rig's side of the firmware contract (docs/protocol.md,
// issue 8 section 1): each pins one point where the document and the rig
// must agree.

import (
	"context"
	"strings"
	"testing"
	"time"
	"unicode/utf8"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/record"
)

// The rig's stop carries the seq of the latest state it sent (section 6:
// "the seq of the latest state sent, 0 before the first").
func TestStopSeqIsLatestStateSeq(t *testing.T) {
	cfg, run := shortRun(t, 40)
	var last uint32
	var stopSeq uint32
	fw := func(conn bridges.Conn) error {
		if _, err := greet(conn, 2, protocol.Version); err != nil {
			return err
		}
		var m protocol.Message
		for {
			if err := conn.Recv(time.Now().Add(5*time.Second), &m); err != nil {
				return err
			}
			switch m.Type {
			case protocol.TypeState:
				last = m.Seq
				c := protocol.Message{Type: protocol.TypeCommand, Seq: m.Seq}
				c.Command.Joints = 2
				conn.Send(&c)
			case protocol.TypeStop:
				stopSeq = m.Seq
				return nil
			}
		}
	}
	res, _, _ := run(cfg, fw)
	if res.Summary.Ticks != 40 || last != 40 {
		t.Fatalf("%d ticks, last state seq %d: want 40 and 40", res.Summary.Ticks, last)
	}
	if stopSeq != last {
		t.Fatalf("stop seq %d, want the latest state's seq %d", stopSeq, last)
	}
}

// Before any state the stop's seq is 0 (a refused greeting).
func TestStopSeqBeforeFirstStateIsZero(t *testing.T) {
	m, s, cfg := demo(t, 5)
	var seq uint32 = 99
	fw := func(conn bridges.Conn) error {
		var g protocol.Message
		g.Type = protocol.TypeGreeting
		g.Greeting = protocol.Greeting{Version: protocol.Version, Actuators: 3, Name: "three"}
		conn.Send(&g)
		for {
			if err := conn.Recv(time.Now().Add(5*time.Second), &g); err != nil {
				return err
			}
			if g.Type == protocol.TypeStop {
				seq = g.Seq
				return nil
			}
		}
	}
	if _, _, err, ferr := runWith(t, context.Background(), cfg, m, s, fw); err == nil || ferr != nil {
		t.Fatalf("run error %v, firmware %v: want a refused run and a stop", err, ferr)
	}
	if seq != 0 {
		t.Fatalf("stop before any state has seq %d, want 0", seq)
	}
}

// Every stop text the rig can send fits the 32-byte str32 field whole: no
// text is ever cut, mid-word or otherwise. stopText is the only source of
// the rig's stop texts (sendStop uses nothing else), so trying every stop
// code with every alarm kind that can trip, both ends of the numbers it
// prints, is trying every text.
func TestEveryStopTextFits(t *testing.T) {
	codes := []uint8{protocol.StopEnd, protocol.StopEStop, protocol.StopWatchdog, protocol.StopAborted,
		protocol.StopFirmware, protocol.StopBadVersion, protocol.StopMismatch, 200}
	outcomes := []record.Outcome{"", record.Pass, record.Fail, record.Tripped, record.Aborted}
	kinds := append([]string{""}, AlarmKinds...)
	watchdogs := []time.Duration{time.Millisecond, 50 * time.Millisecond, time.Second, time.Hour * 24 * 365}
	seen := map[string]bool{}
	for _, code := range codes {
		for _, o := range outcomes {
			for _, k := range kinds {
				for _, op := range []bool{false, true} {
					for _, wd := range watchdogs {
						for _, n := range [][3]int{{0, 0, 1}, {255, 255, 8}, {2, 1, 2}} {
							txt := stopText(code, o, k, op, wd, n[0], n[1], n[2])
							if len(txt) == 0 || len(txt) > protocol.MaxNameLen || !utf8.ValidString(txt) {
								t.Fatalf("stop text %q (%d bytes) for code %d, kind %q: want 1…%d bytes of UTF-8", txt, len(txt), code, k, protocol.MaxNameLen)
							}
							if k != "" && code == protocol.StopEStop && !strings.HasSuffix(txt, k) {
								t.Fatalf("e-stop text %q does not name the alarm %s whole", txt, k)
							}
							seen[txt] = true
						}
					}
				}
			}
		}
	}
	// The frame encodes: an over-long text would be an encoding error.
	var m protocol.Message
	m.Type = protocol.TypeStop
	buf := make([]byte, protocol.MaxFrameLen)
	for txt := range seen {
		m.Stop.Text = txt
		if _, err := protocol.Encode(buf, &m); err != nil {
			t.Fatalf("stop text %q does not encode: %v", txt, err)
		}
	}
	t.Logf("%d distinct stop texts, all at most %d bytes", len(seen), protocol.MaxNameLen)
}

// A firmware ends a run normally with stop reason 0 (end): no alarm, the
// run is judged by its criteria (pass here), and the rig answers with its
// own stop(end).
func TestFirmwareStopEndEndsRunNormally(t *testing.T) {
	for _, clock := range []ClockMode{Lockstep, Wallclock} {
		t.Run(string(clock), func(t *testing.T) {
			cfg, run := shortRun(t, 500)
			cfg.Clock = clock
			cfg.Watchdog = time.Second
			var rigStop protocol.Stop
			sent := false
			fw := hooked(func(conn bridges.Conn, seq uint32, _ *protocol.Command) bool {
				if sent {
					return false
				}
				if seq == 60 {
					sent = true
					stop := protocol.Message{Type: protocol.TypeStop, Seq: seq, Stop: protocol.Stop{Reason: protocol.StopEnd, Text: "programme done"}}
					conn.Send(&stop)
					return false
				}
				return true
			}, &rigStop)
			res, _, dir := run(cfg, fw)
			if res.Summary.Outcome != record.Pass {
				t.Fatalf("outcome %s (%s): want pass", res.Summary.Outcome, res.Summary.Reason)
			}
			if res.Summary.Ticks >= 500 || res.Summary.Ticks < 55 {
				t.Fatalf("%d ticks: want the run to end near tick 60, not at its duration", res.Summary.Ticks)
			}
			for k, n := range res.Summary.Alarms {
				// Late wall-clock ticks depend on the host's load, not on
				// how the run ended.
				if n != 0 && k != AlarmDeadlineMiss {
					t.Fatalf("alarm %s counted %d: a normal end raises none", k, n)
				}
			}
			if len(eventsOf(t, dir, "firmware_done")) != 1 {
				t.Fatal("no firmware_done event in the record")
			}
			if rigStop.Reason != protocol.StopEnd || rigStop.Text != "run finished" {
				t.Fatalf("rig answered %+v, want stop(end, run finished)", rigStop)
			}
		})
	}
}

// The safe-mode status bit raises firmware_safe_mode once per rising edge
// (a warning: the run goes on, the torques are applied as sent).
func TestSafeModeBitRaisesAlarm(t *testing.T) {
	cfg, run := shortRun(t, 300)
	// The two edges are 0.15 s apart, beyond the alarm interval set here,
	// so both are logged as well as counted.
	cfg.AlarmInterval = 0.1
	fw := scripted(func(seq uint32, c *protocol.Command) {
		if (seq >= 50 && seq < 100) || seq >= 200 {
			c.Status = protocol.StatusSafeMode
		}
	})
	res, rows, dir := run(cfg, fw)
	if res.Summary.Outcome != record.Pass || res.Summary.Ticks != 300 {
		t.Fatalf("outcome %s after %d ticks (%s)", res.Summary.Outcome, res.Summary.Ticks, res.Summary.Reason)
	}
	if n := res.Summary.Alarms[AlarmFirmwareSafeMode]; n != 2 {
		t.Fatalf("%d firmware_safe_mode alarms for two rising edges", n)
	}
	ev := eventsOf(t, dir, AlarmFirmwareSafeMode)
	if len(ev) != 2 || ev[0].Tick != 49 || ev[0].Severity != record.Warn {
		t.Fatalf("events %+v: want two warnings, the first at tick 49", ev)
	}
	if len(rows) != 300 {
		t.Fatalf("%d rows", len(rows))
	}
}

// time_us of a state is the simulated time at the start of its tick,
// before the plant steps: state seq n (n ≥ 1) carries (n−1)·1e6/tick_hz,
// and the record's tick index is seq − 1.
func TestStateTimeIsStartOfTick(t *testing.T) {
	cfg, run := shortRun(t, 25)
	times := map[uint32]uint64{}
	fw := func(conn bridges.Conn) error {
		if _, err := greet(conn, 2, protocol.Version); err != nil {
			return err
		}
		_, err := untilStop(conn, func(m *protocol.Message) {
			if m.Type != protocol.TypeState {
				return
			}
			times[m.Seq] = m.State.TimeUS
			c := protocol.Message{Type: protocol.TypeCommand, Seq: m.Seq}
			c.Command.Joints = 2
			conn.Send(&c)
		})
		return err
	}
	_, rows, _ := run(cfg, fw)
	if len(times) != 25 {
		t.Fatalf("%d states", len(times))
	}
	for seq, us := range times {
		want := uint64(seq-1) * 1000
		if us != want {
			t.Fatalf("state seq %d has time_us %d, want %d (start of its tick)", seq, us, want)
		}
		row := rows[seq-1]
		if row.Index != int64(seq-1) || row.T <= float64(us)/1e6 {
			t.Fatalf("row %d (t=%g) for state seq %d: the row holds the state at the end of the tick", row.Index, row.T, seq)
		}
	}
}

// Heartbeats (section 6): the rig sends none in a whole run (its states,
// and lockstep resends every 10 ms, are its sign of life), and a heartbeat
// from the firmware never stands in for a command: only a valid command
// resets the watchdog.
func TestHeartbeatsNeverReplaceCommands(t *testing.T) {
	cfg, run := shortRun(t, 200)
	cfg.Watchdog = 300 * time.Millisecond
	cfg.pressure = quietHost // a silent firmware on a quiet host: the verdict must not depend on this host's load
	heartbeatsIn := 0
	fw := func(conn bridges.Conn) error {
		if _, err := greet(conn, 2, protocol.Version); err != nil {
			return err
		}
		_, err := untilStop(conn, func(m *protocol.Message) {
			switch m.Type {
			case protocol.TypeHeartbeat:
				heartbeatsIn++
			case protocol.TypeState:
				if m.Seq < 30 {
					c := protocol.Message{Type: protocol.TypeCommand, Seq: m.Seq}
					c.Command.Joints = 2
					conn.Send(&c)
					return
				}
				hb := protocol.Message{Type: protocol.TypeHeartbeat, Seq: m.Seq}
				conn.Send(&hb)
			}
		})
		return err
	}
	res, _, _ := run(cfg, fw)
	if res.Summary.Outcome != record.Tripped || res.Summary.Alarms[AlarmWatchdog] != 1 || res.Summary.Ticks != 29 {
		t.Fatalf("outcome %s after %d ticks, alarms %v: want a watchdog trip at tick 29", res.Summary.Outcome, res.Summary.Ticks, res.Summary.Alarms)
	}
	if heartbeatsIn != 0 {
		t.Fatalf("the rig sent %d heartbeats; protocol v1 says it sends none", heartbeatsIn)
	}
}

// Greetings buffered before the rig opened the port each get a config
// (section 6): the firmware receives duplicates, and the run goes on
// without an alarm.
func TestBufferedGreetingsEachGetAConfig(t *testing.T) {
	cfg, run := shortRun(t, 50)
	configs := 0
	fw := func(conn bridges.Conn) error {
		var g protocol.Message
		g.Type = protocol.TypeGreeting
		g.Greeting = protocol.Greeting{Version: protocol.Version, Actuators: 2, Name: "eager"}
		for i := 0; i < 3; i++ {
			conn.Send(&g)
		}
		_, err := untilStop(conn, func(m *protocol.Message) {
			switch m.Type {
			case protocol.TypeConfig:
				configs++
			case protocol.TypeState:
				c := protocol.Message{Type: protocol.TypeCommand, Seq: m.Seq}
				c.Command.Joints = 2
				conn.Send(&c)
			}
		})
		return err
	}
	res, _, _ := run(cfg, fw)
	if res.Summary.Ticks != 50 || res.Summary.Outcome == record.Tripped {
		t.Fatalf("outcome %s after %d ticks (%s)", res.Summary.Outcome, res.Summary.Ticks, res.Summary.Reason)
	}
	if configs != 3 {
		t.Fatalf("%d configs for 3 greetings", configs)
	}
	if n := res.Summary.Alarms[AlarmFirmwareReset]; n != 0 {
		t.Fatalf("%d firmware_reset alarms for greetings before the first command", n)
	}
}

// errAtConn reports one frame error at its nth Recv.
type errAtConn struct {
	bridges.Conn
	n, at int
	err   error
}

func (c *errAtConn) Recv(d time.Time, m *protocol.Message) error {
	c.n++
	if c.n == c.at {
		return c.err
	}
	return c.Conn.Recv(d, m)
}

// A frame of another protocol version after the handshake (section 8) is a
// bad_frame warning, not version_mismatch: the version was agreed by the
// greeting, so it is a broken frame, and the run goes on.
func TestOtherVersionMidRunIsBadFrame(t *testing.T) {
	m, s, cfg := timedDemo(t, 0.1)
	pe := &protocol.Error{Kind: protocol.KindVersion, Type: protocol.TypeCommand, Got: 2, Want: 1}
	wrap := func(rig bridges.Conn) bridges.Conn {
		return &errAtConn{Conn: rig, at: 40, err: &bridges.FrameError{Reason: pe.Error(), Err: pe}}
	}
	res, dir, err, _ := runWrapped(t, context.Background(), cfg, m, s, wrap, referenceFirmware)
	if err != nil {
		t.Fatal(err)
	}
	if res.Summary.Ticks != 100 || res.Summary.Outcome == record.Tripped {
		t.Fatalf("outcome %s after %d ticks (%s)", res.Summary.Outcome, res.Summary.Ticks, res.Summary.Reason)
	}
	if res.Summary.Alarms[AlarmBadFrame] != 1 || res.Summary.Alarms[AlarmVersionMismatch] != 0 {
		t.Fatalf("alarms %v: want one bad_frame and no version_mismatch", res.Summary.Alarms)
	}
	if ev := eventsOf(t, dir, AlarmBadFrame); len(ev) != 1 || !strings.Contains(ev[0].Message, "speaks version 2") {
		t.Fatalf("bad_frame events %+v", ev)
	}
}

// The sanity bound is 10 000 N·m (section 3.4): a torque of exactly that
// size is a torque (clipped to the limit), one just beyond is rejected.
func TestTorqueSanityBoundIs10000(t *testing.T) {
	if DefaultTorqueSanity != 10000 {
		t.Fatalf("DefaultTorqueSanity %g; docs/protocol.md says 10 000 N·m", DefaultTorqueSanity)
	}
	cfg, run := shortRun(t, 40)
	cfg.Severity = map[string]Severity{AlarmBadTorque: SeverityWarn}
	fw := scripted(func(seq uint32, c *protocol.Command) {
		switch seq {
		case 10:
			c.Torque[0] = 10000
		case 20:
			c.Torque[0] = 10000.5
		}
	})
	res, _, _ := run(cfg, fw)
	if res.Link.BadTorques != 1 || res.Summary.Alarms[AlarmTorqueSaturation] != 1 {
		t.Fatalf("%d bad torques, %d saturations: want 10000 clipped and 10000.5 rejected", res.Link.BadTorques, res.Summary.Alarms[AlarmTorqueSaturation])
	}
}

// Lockstep does not measure the round trip (section 7): its summary has
// no latency, so a lockstep run stays bit-identical. `gaitrig latency`
// measures a link instead.
func TestLockstepSummaryHasNoLatency(t *testing.T) {
	cfg, run := shortRun(t, 20)
	res, _, _ := run(cfg, referenceFirmware)
	if res.Summary.LatencyUS != nil {
		t.Fatalf("lockstep summary latency %+v, want none", res.Summary.LatencyUS)
	}
}
