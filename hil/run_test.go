package hil

import (
	"context"
	"errors"
	"math"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/record"
)

func TestReferenceWalks30StepsLockstep(t *testing.T) {
	m, s, cfg := demo(t, 30)
	res, run, ticks := runAndRead(t, context.Background(), cfg, m, s, referenceFirmware)
	sum := res.Summary
	if sum.Outcome != record.Pass || sum.Steps < 30 {
		t.Fatalf("outcome %s after %d steps (%s)", sum.Outcome, sum.Steps, sum.Reason)
	}
	for kind, n := range sum.Alarms {
		t.Errorf("alarm %s raised %d times on a nominal walk", kind, n)
	}
	if len(run.Steps) != sum.Steps {
		t.Errorf("steps.csv has %d rows, summary says %d steps", len(run.Steps), sum.Steps)
	}
	if int64(len(ticks)) != sum.Ticks {
		t.Errorf("telemetry has %d rows, summary says %d ticks", len(ticks), sum.Ticks)
	}
	last := run.Steps[len(run.Steps)-1]
	t.Logf("%d steps in %.2f s, mean speed %.3f m/s, last step %.3f m in %.3f s, CoT %.3f, peak util %.3f, min N %.0f N; %d stale, %d resends",
		sum.Steps, sum.SimTimeS, sum.MeanSpeedMPS, last.LengthM, last.DurationS, last.CostOfTransport,
		sum.PeakFrictionUtilization, sum.MinNormalForceN, res.Link.StaleCommands, res.Link.Resends)
	if !(last.PosWorkJ > 0) || !(last.CostOfTransport > 0) || !(last.ImpactLossJ > 0) || !(last.CoPTravelM > 0) {
		t.Errorf("step metrics not filled: %+v", last)
	}
	if run.Summary.LatencyUS != nil {
		t.Errorf("lockstep summary carries a latency %+v; latency is a wall-clock figure", run.Summary.LatencyUS)
	}
}

func TestLockstepIsBitIdentical(t *testing.T) {
	hash := func(seed int64) string {
		m, s, cfg := demo(t, 8)
		cfg.Seed = seed
		cfg.Sensors.AngleNoise = 1e-3
		cfg.Sensors.PitchRateNoise = 1e-2
		_, dir, err, ferr := runWith(t, context.Background(), cfg, m, s, referenceFirmware)
		if err != nil || ferr != nil {
			t.Fatal(err, ferr)
		}
		return fileHash(t, filepath.Join(dir, record.TelemetryFile))
	}
	a, b := hash(11), hash(11)
	if a != b {
		t.Fatalf("two lockstep runs with seed 11 wrote different telemetry: %s vs %s", a, b)
	}
	// The hash must see the noise: another seed gives another log.
	if c := hash(12); c == a {
		t.Fatalf("seed 12 wrote the same telemetry as seed 11: the hash does not see the sensor noise")
	}
}

func TestWatchdogTripsOnSilentFirmware(t *testing.T) {
	m, s, cfg := demo(t, 30)
	cfg.Watchdog = 30 * time.Millisecond
	var got protocol.Stop
	// Reads states, never answers.
	cfg.pressure = quietHost // a silent firmware on a quiet host: the verdict must not depend on this host's load
	silent := hooked(func(bridges.Conn, uint32, *protocol.Command) bool { return false }, &got)
	res, dir, err, ferr := runWith(t, context.Background(), cfg, m, s, silent)
	if err != nil || ferr != nil {
		t.Fatal(err, ferr)
	}
	if res.Summary.Outcome != record.Tripped {
		t.Fatalf("outcome %s, want tripped", res.Summary.Outcome)
	}
	if got.Reason != protocol.StopWatchdog {
		t.Errorf("firmware got stop reason %d (%q), want %d (watchdog)", got.Reason, got.Text, protocol.StopWatchdog)
	}
	run := openRun(t, dir)
	if run.Summary.Outcome != record.Tripped || run.Summary.Alarms[AlarmWatchdog] != 1 {
		t.Errorf("summary.json: outcome %s, alarms %v", run.Summary.Outcome, run.Summary.Alarms)
	}
	wd := eventsOf(t, dir, AlarmWatchdog)
	if len(wd) != 1 || wd[0].Severity != record.Trip || wd[0].Values["silent_ms"] < 30 {
		t.Fatalf("watchdog events %+v", wd)
	}
	if len(eventsOf(t, dir, "e_stop")) != 1 || len(eventsOf(t, dir, "run_end")) != 1 {
		t.Errorf("e_stop and run_end must be logged once each")
	}
	if res.Link.Resends == 0 {
		t.Errorf("no resend before the watchdog tripped")
	}
}

func TestBadTorquesRejected(t *testing.T) {
	tests := []struct {
		name   string
		torque float32
	}{
		{"NaN", float32(math.NaN())},
		{"+Inf", float32(math.Inf(1))},
		{"-Inf", float32(math.Inf(-1))},
		{"huge", 1e30},
	}
	for _, tc := range tests {
		for _, sev := range []Severity{SeverityWarn, SeverityTrip} {
			t.Run(tc.name+"/"+string(sev), func(t *testing.T) {
				m, s, cfg := timedDemo(t, 0.2)
				cfg.Severity = map[string]Severity{AlarmBadTorque: sev}
				// A firmware that answers with a steady 5 N·m and sends the
				// bad torque on hip_right at every 20th state.
				fw := scripted(func(seq uint32, c *protocol.Command) {
					c.Torque = [protocol.MaxJoints]float32{5, 5}
					if seq%20 == 0 {
						c.Torque[1] = tc.torque
					}
				})
				res, run, ticks := runAndRead(t, context.Background(), cfg, m, s, fw)
				bad := 0
				for _, row := range ticks {
					cmd := row.Commanded[1]
					if !(math.IsNaN(cmd) || math.IsInf(cmd, 0) || math.Abs(cmd) > 1e4) {
						if row.Applied[1] != 5 && row.Index > 0 {
							t.Fatalf("tick %d: sound command 5 N·m applied as %g", row.Index, row.Applied[1])
						}
						continue
					}
					bad++
					if row.Applied[0] != 0 || row.Applied[1] != 0 {
						t.Fatalf("tick %d: bad torque %g commanded, applied %v (want zero)", row.Index, cmd, row.Applied[:2])
					}
				}
				if bad == 0 {
					t.Fatal("no bad command reached the telemetry")
				}
				alarms := eventsOf(t, run.Dir, AlarmBadTorque)
				if len(alarms) == 0 {
					t.Fatal("no bad_torque alarm logged")
				}
				switch sev {
				case SeverityTrip:
					if res.Summary.Outcome != record.Tripped || bad != 1 {
						t.Errorf("trip severity: outcome %s after %d bad commands", res.Summary.Outcome, bad)
					}
				case SeverityWarn:
					if res.Summary.Outcome == record.Tripped || res.Link.BadTorques != uint64(bad) || bad < 9 {
						t.Errorf("warn severity: outcome %s, %d bad commands in telemetry, %d counted", res.Summary.Outcome, bad, res.Link.BadTorques)
					}
					if res.Summary.Alarms[AlarmBadTorque] != bad {
						t.Errorf("summary counts %d bad_torque alarms, telemetry shows %d", res.Summary.Alarms[AlarmBadTorque], bad)
					}
				}
			})
		}
	}
}

func TestFloodingFirmwareIsSurvived(t *testing.T) {
	m, s, cfg := demo(t, 10)
	// Each state is answered by the reference law's command plus a burst of
	// duplicates and commands for sequence numbers that never existed.
	fw := func(conn bridges.Conn) error {
		rig := &floodConn{Conn: conn, extra: 6}
		return referenceFirmware(rig)
	}
	res, _, err, ferr := runWith(t, context.Background(), cfg, m, s, fw)
	if err != nil || ferr != nil {
		t.Fatal(err, ferr)
	}
	if res.Summary.Outcome != record.Pass || res.Summary.Steps < 10 {
		t.Fatalf("outcome %s, %d steps (%s)", res.Summary.Outcome, res.Summary.Steps, res.Summary.Reason)
	}
	if res.Link.StaleCommands == 0 {
		t.Fatal("flood not counted as stale commands")
	}
	t.Logf("%d stale commands counted over %d ticks", res.Link.StaleCommands, res.Summary.Ticks)
}

// floodConn sends every command once more per extra, half with a wrong
// sequence number.
type floodConn struct {
	bridges.Conn
	extra int
}

func (f *floodConn) Send(m *protocol.Message) error {
	if err := f.Conn.Send(m); err != nil || m.Type != protocol.TypeCommand {
		return err
	}
	c := *m
	for i := 0; i < f.extra; i++ {
		if i%2 == 1 {
			c.Seq = m.Seq + 1000 + uint32(i)
		}
		f.Conn.Send(&c)
	}
	return nil
}

// frameErrConn makes every nth Recv report a rejected frame, as a serial
// link does after line noise.
type frameErrConn struct {
	bridges.Conn
	every, n int
}

func (f *frameErrConn) Recv(d time.Time, m *protocol.Message) error {
	f.n++
	if f.n%f.every == 0 {
		return &bridges.FrameError{Reason: "bad CRC: got 0x1234, computed 0xBEEF", Bytes: 40}
	}
	return f.Conn.Recv(d, m)
}

func TestBadFramesAlarmAndCount(t *testing.T) {
	m, s, cfg := demo(t, 6)
	noisy := func(rig bridges.Conn) bridges.Conn { return &frameErrConn{Conn: rig, every: 50} }
	res, dir, err, _ := runWrapped(t, context.Background(), cfg, m, s, noisy, referenceFirmware)
	if err != nil {
		t.Fatal(err)
	}
	if res.Summary.Outcome != record.Pass {
		t.Fatalf("outcome %s (%s)", res.Summary.Outcome, res.Summary.Reason)
	}
	if res.Link.BadFrames == 0 || uint64(res.Summary.Alarms[AlarmBadFrame]) != res.Link.BadFrames {
		t.Fatalf("%d bad frames counted, %d alarms", res.Link.BadFrames, res.Summary.Alarms[AlarmBadFrame])
	}
	logged := eventsOf(t, dir, AlarmBadFrame)
	if len(logged) == 0 || len(logged) >= int(res.Link.BadFrames) {
		t.Fatalf("%d bad_frame lines logged for %d bad frames: want rate-limited, at least one", len(logged), res.Link.BadFrames)
	}
	t.Logf("%d bad frames, %d log lines", res.Link.BadFrames, len(logged))
}

func TestAbortSendsStopAndWritesEverything(t *testing.T) {
	m, s, cfg := demo(t, 1000)
	ctx, cancel := context.WithCancelCause(context.Background())
	var got protocol.Stop
	fw := hooked(func(_ bridges.Conn, seq uint32, _ *protocol.Command) bool {
		if seq == 300 {
			cancel(errors.New("SIGINT"))
		}
		return true
	}, &got)
	res, run, ticks := runAndRead(t, ctx, cfg, m, s, fw)
	if res.Summary.Outcome != record.Aborted || got.Reason != protocol.StopAborted {
		t.Fatalf("outcome %s, stop reason %d, want aborted", res.Summary.Outcome, got.Reason)
	}
	if int64(len(ticks)) != run.Summary.Ticks || len(ticks) < 299 {
		t.Fatalf("telemetry after abort: %d rows, summary %d ticks", len(ticks), run.Summary.Ticks)
	}
}

func TestHandshakeFailures(t *testing.T) {
	tests := []struct {
		name    string
		fw      firmwareFunc
		outcome record.Outcome
		wantErr bool
		stop    uint8
	}{
		{"wrong protocol version", func(c bridges.Conn) error {
			_, err := greet(c, 2, protocol.Version+1)
			return err
		}, record.Tripped, false, protocol.StopBadVersion},
		{"wrong actuator count", func(c bridges.Conn) error {
			_, err := greet(c, 1, protocol.Version)
			return err
		}, record.Aborted, true, protocol.StopMismatch},
		{"no greeting", func(c bridges.Conn) error {
			_, err := untilStop(c, nil)
			return err
		}, record.Aborted, true, protocol.StopAborted},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			m, s, cfg := demo(t, 5)
			cfg.HandshakeTimeout = 100 * time.Millisecond
			res, dir, err, ferr := runWith(t, context.Background(), cfg, m, s, tc.fw)
			if (err != nil) != tc.wantErr {
				t.Fatalf("Run error %v, want error %v", err, tc.wantErr)
			}
			if err != nil {
				t.Logf("error says: %v", err)
			}
			var se *stopError
			if tc.stop != protocol.StopAborted && (!errors.As(ferr, &se) || se.s.Reason != tc.stop) {
				t.Fatalf("firmware saw %v, want a stop with reason %d", ferr, tc.stop)
			}
			run := openRun(t, dir)
			if tc.stop == protocol.StopMismatch {
				// The setup is wrong, not the firmware: an error the
				// command line maps to exit 2, and an alarm of its own.
				if !errors.Is(err, ErrActuatorMismatch) {
					t.Fatalf("error %v does not wrap ErrActuatorMismatch", err)
				}
				if n := run.Summary.Alarms[AlarmActuatorMismatch]; n != 1 || len(eventsOf(t, dir, AlarmActuatorMismatch)) != 1 {
					t.Fatalf("actuator_mismatch counted %d, logged %d: want 1 each", n, len(eventsOf(t, dir, AlarmActuatorMismatch)))
				}
				if len(se.s.Text) > protocol.MaxNameLen || !strings.Contains(se.s.Text, "2 actuators, not 1") {
					t.Fatalf("stop text %q should say what the rig needs", se.s.Text)
				}
			}
			if run.Summary.Outcome != tc.outcome || (res.Summary.Outcome != "" && res.Summary.Outcome != tc.outcome) {
				t.Fatalf("outcome %s, want %s (%s)", run.Summary.Outcome, tc.outcome, run.Summary.Reason)
			}
		})
	}
}

func TestReplayMatchesExactly(t *testing.T) {
	m, s, cfg := demo(t, 6)
	cfg.Sensors.AngleNoise = 1e-3
	cfg.Actuators.Lag = 0.005
	cfg.Pushes = []Push{{AtStep: 2, Force: [2]float64{30, 0}, Duration: 0.1}}
	_, _, ticks := runAndRead(t, context.Background(), cfg, m, s, referenceFirmware)
	pushed := 0
	for _, row := range ticks {
		if row.Push[0] != 0 {
			pushed++
		}
	}
	if pushed != 100 {
		t.Errorf("push held for %d ticks, want 100 (0.1 s at 1 kHz)", pushed)
	}
	r, err := Replay(m, s, ticks, DefaultTickHz)
	if err != nil {
		t.Fatal(err)
	}
	if !r.Match || r.Ticks != len(ticks) {
		t.Fatalf("replay of an untouched record: %s", r)
	}
	// A replay must notice a change: perturb one torque by 1 µN·m (one ulp
	// can vanish in the rounding of a single tick).
	k := len(ticks) / 2
	ticks[k].Applied[0] += 1e-6
	r, err = Replay(m, s, ticks, DefaultTickHz)
	if err != nil {
		t.Fatal(err)
	}
	if r.Match || r.FirstDivergence != ticks[k].Index {
		t.Fatalf("replay with one torque changed by 1 µN·m at tick %d: %s", ticks[k].Index, r)
	}
	// The divergence is named by the telemetry column a person looks up.
	qNames, vNames := record.StateColumns(m.NumDOF())
	if !slices.Contains(qNames, r.Field) && !slices.Contains(vNames, r.Field) {
		t.Fatalf("divergence field %q is not a telemetry column of the state (%v, %v)", r.Field, qNames, vNames)
	}
}

// After a watchdog trip the plant can run on under the e-stop policy, so
// the record shows what the e-stop leads to.
func TestEStopCoast(t *testing.T) {
	tests := []struct {
		policy  EStopPolicy
		damping float64
	}{
		{EStopZero, 0},
		{EStopDamp, 20},
	}
	for _, tc := range tests {
		t.Run(string(tc.policy), func(t *testing.T) {
			m, s, cfg := demo(t, 30)
			cfg.Watchdog = 30 * time.Millisecond
			cfg.EStop, cfg.EStopDamping, cfg.EStopCoast = tc.policy, tc.damping, 1.0
			// Answers 200 states, then falls silent.
			cfg.pressure = quietHost
			silentAfter := hooked(func(_ bridges.Conn, seq uint32, _ *protocol.Command) bool { return seq <= 200 }, nil)
			res, run, ticks := runAndRead(t, context.Background(), cfg, m, s, silentAfter)
			// The watchdog trips at tick 200, whose state is the first left
			// unanswered, or earlier when a loaded host keeps the firmware's
			// goroutine from answering for longer than the watchdog (the
			// watchdog rightly counts that as silence). The coast starts at
			// the tripping tick and lasts 1 s unless the walker falls first
			// (the plant stops at a fall); either way it must go well past
			// the trip.
			stops := eventsOf(t, run.Dir, "e_stop")
			if len(stops) != 1 || stops[0].Tick > 200 {
				t.Fatalf("e-stop events %+v: want one, at tick 200 at the latest", stops)
			}
			trip := stops[0].Tick
			fell := res.Summary.Alarms[AlarmFall] == 1
			if res.Summary.Outcome != record.Tripped || res.Summary.Ticks < trip+60 || (!fell && res.Summary.Ticks < trip+1000) {
				t.Fatalf("outcome %s after %d ticks (trip at tick %d), alarms %v: want tripped, then coasting until a fall or for 1 s",
					res.Summary.Outcome, res.Summary.Ticks, trip, res.Summary.Alarms)
			}
			checked := 0
			for k := int(trip) + 1; k < len(ticks); k++ {
				row, prev := &ticks[k], &ticks[k-1]
				if row.Commanded[0] != 0 || row.Commanded[1] != 0 {
					t.Fatalf("tick %d after the e-stop has a commanded torque %v", row.Index, row.Commanded[:2])
				}
				if tc.policy == EStopZero && (row.Applied[0] != 0 || row.Applied[1] != 0) {
					t.Fatalf("tick %d: applied %v after a zero e-stop", row.Index, row.Applied[:2])
				}
				if tc.policy == EStopDamp && row.Index > trip+40 && row.Index < trip+200 {
					// Joint rate at the tick start = leg rate − torso rate of
					// the previous row's end state; the demo limit is 60 N·m.
					want := math.Max(-60, math.Min(60, -tc.damping*(prev.V[2]-prev.V[4])))
					if row.Applied[0] != want {
						t.Fatalf("tick %d: applied %g, want −c·rate = %g", row.Index, row.Applied[0], want)
					}
					checked++
				}
			}
			if tc.policy == EStopDamp && checked == 0 {
				t.Fatal("no coasting tick checked")
			}
			t.Logf("%s: %d ticks, alarms %v", tc.policy, res.Summary.Ticks, res.Summary.Alarms)
		})
	}
}
