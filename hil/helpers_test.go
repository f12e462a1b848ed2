package hil

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/inproc"
	"gaitrig/bridges/protocol"
	"gaitrig/firmware/reference"
	"gaitrig/plant"
	"gaitrig/record"
)

// demo returns the demo walker, its start state and a lockstep config that
// runs for the given number of steps (and at most 60 s).
func demo(t testing.TB, steps int) (*plant.Model, plant.State, Config) {
	t.Helper()
	cfg := Config{
		Physics:   plant.Options{IgnoreScuff: true},
		MaxSteps:  steps,
		Duration:  60,
		Sensors:   SensorModel{CountsPerRev: 4096, ContactThreshold: 5},
		Actuators: ActuatorModel{TorqueLimit: 60},
		Seed:      7,
		// The watchdog is the loop's default (50 ms): in lockstep it counts
		// only the firmware's answer time, so a loaded host does not trip
		// it (TestLockstepHostStallDoesNotTripTheWatchdog).
	}
	m, err := plant.New(plant.DemoParams(), cfg.Physics)
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

// timedDemo is demo for a run that ends on time alone: the given simulated
// seconds, no step limit.
func timedDemo(t testing.TB, seconds float64) (*plant.Model, plant.State, Config) {
	t.Helper()
	m, s, cfg := demo(t, 0)
	cfg.MaxSteps, cfg.Duration = 0, seconds
	return m, s, cfg
}

// newRecord creates a run folder in a temporary directory.
func newRecord(t testing.TB, cfg Config, m *plant.Model, s plant.State) *record.Writer {
	t.Helper()
	mf, err := Manifest(cfg, m, s, "inproc", "test")
	if err != nil {
		t.Fatal(err)
	}
	w, err := record.Create(filepath.Join(t.TempDir(), "run"), mf)
	if err != nil {
		t.Fatal(err)
	}
	return w
}

// firmwareFunc is a test firmware: it gets the firmware end of the link.
type firmwareFunc func(conn bridges.Conn) error

// runWith runs the loop against fw over an in-process link and returns the
// result, the run folder and what the firmware returned.
func runWith(t testing.TB, ctx context.Context, cfg Config, m *plant.Model, s plant.State, fw firmwareFunc) (Result, string, error, error) {
	t.Helper()
	return runWrapped(t, ctx, cfg, m, s, nil, fw)
}

// runWrapped is runWith with the rig's end of the link seen through wrap
// (nil: as it is), for links that misbehave on purpose.
func runWrapped(t testing.TB, ctx context.Context, cfg Config, m *plant.Model, s plant.State,
	wrap func(rig bridges.Conn) bridges.Conn, fw firmwareFunc) (Result, string, error, error) {
	t.Helper()
	rig, fwEnd := inproc.Pair()
	defer rig.Close()
	var conn bridges.Conn = rig
	if wrap != nil {
		conn = wrap(rig)
	}
	rec := newRecord(t, cfg, m, s)
	fwErr := make(chan error, 1)
	go func() { fwErr <- fw(fwEnd) }()
	res, err := Run(ctx, cfg, m, s, conn, rec)
	rig.Close()
	var ferr error
	select {
	case ferr = <-fwErr:
	case <-time.After(10 * time.Second):
		t.Fatal("test firmware did not end within 10 s of the run")
	}
	return res, rec.Dir(), err, ferr
}

// runAndRead is runWith for a run that must end without an error from the
// loop or the firmware; it returns the result and the run folder read back
// with its telemetry, which must be complete.
func runAndRead(t testing.TB, ctx context.Context, cfg Config, m *plant.Model, s plant.State, fw firmwareFunc) (Result, *record.Run, []record.Tick) {
	t.Helper()
	res, dir, err, ferr := runWith(t, ctx, cfg, m, s, fw)
	if err != nil {
		t.Fatal(err)
	}
	if ferr != nil {
		t.Fatalf("firmware: %v", ferr)
	}
	run, ticks := readRun(t, dir)
	return res, run, ticks
}

// readRun opens a finished run folder and reads all its telemetry rows,
// failing the test when the summary is missing or the last row is cut.
func readRun(t testing.TB, dir string) (*record.Run, []record.Tick) {
	t.Helper()
	run := openRun(t, dir)
	ticks, truncated, err := run.AllTicks()
	if err != nil || truncated {
		t.Fatalf("telemetry of %s: truncated %v, %v", dir, truncated, err)
	}
	return run, ticks
}

// shortRun returns a lockstep config of the demo walker that runs for the
// given number of ticks, and a function that runs it against a firmware
// and returns the result, the telemetry and the run folder.
func shortRun(t *testing.T, ticks int) (Config, func(cfg Config, fw firmwareFunc) (Result, []record.Tick, string)) {
	m, s, cfg := timedDemo(t, float64(ticks)/DefaultTickHz)
	return cfg, func(cfg Config, fw firmwareFunc) (Result, []record.Tick, string) {
		t.Helper()
		res, run, rows := runAndRead(t, context.Background(), cfg, m, s, fw)
		return res, rows, run.Dir
	}
}

// reference firmware with default gains.
func referenceFirmware(conn bridges.Conn) error {
	return reference.Serve(conn, reference.Options{IdleTimeout: 5 * time.Second})
}

// greet does the firmware side of the handshake and returns the config.
func greet(conn bridges.Conn, actuators uint8, version uint8) (protocol.Config, error) {
	var m protocol.Message
	m.Type = protocol.TypeGreeting
	m.Greeting = protocol.Greeting{Version: version, Actuators: actuators, Name: "test-fw", Build: "t"}
	if err := conn.Send(&m); err != nil {
		return protocol.Config{}, err
	}
	for {
		if err := conn.Recv(time.Now().Add(5*time.Second), &m); err != nil {
			return protocol.Config{}, err
		}
		if m.Type == protocol.TypeConfig {
			return m.Config, nil
		}
		if m.Type == protocol.TypeStop {
			return protocol.Config{}, &stopError{m.Stop}
		}
	}
}

type stopError struct{ s protocol.Stop }

func (e *stopError) Error() string { return "stopped: " + e.s.Text }

// answerHook sees each state a scripted firmware receives, with the link,
// and fills the command that answers it (two joints, the state's sequence
// number already set); it returns false to leave the state unanswered.
type answerHook func(conn bridges.Conn, seq uint32, out *protocol.Command) bool

// hooked is a firmware that greets, then hands every state to hook and
// sends the command it filled unless hook declines. When stop is not nil it
// receives the rig's Stop that ended the run.
func hooked(hook answerHook, stop *protocol.Stop) firmwareFunc {
	return func(conn bridges.Conn) error {
		if _, err := greet(conn, 2, protocol.Version); err != nil {
			return err
		}
		st, err := untilStop(conn, func(in *protocol.Message) {
			if in.Type != protocol.TypeState {
				return
			}
			out := protocol.Message{Type: protocol.TypeCommand, Seq: in.Seq}
			out.Command.Joints = 2
			if hook(conn, in.Seq, &out.Command) {
				conn.Send(&out)
			}
		})
		if stop != nil {
			*stop = st
		}
		return err
	}
}

// scripted is a firmware that answers every state with answer(seq).
func scripted(answer func(seq uint32, out *protocol.Command)) firmwareFunc {
	return hooked(func(_ bridges.Conn, seq uint32, out *protocol.Command) bool {
		answer(seq, out)
		return true
	}, nil)
}

// seqTorque answers with a tiny torque that encodes the sequence number.
func seqTorque(seq uint32, c *protocol.Command) { c.Torque[0] = float32(seq) * 1e-3 }

// untilStop reads messages until a Stop arrives and returns it.
func untilStop(conn bridges.Conn, each func(m *protocol.Message)) (protocol.Stop, error) {
	var m protocol.Message
	for {
		err := conn.Recv(time.Now().Add(5*time.Second), &m)
		if err != nil {
			return protocol.Stop{}, err
		}
		if m.Type == protocol.TypeStop {
			return m.Stop, nil
		}
		if each != nil {
			each(&m)
		}
	}
}

// fileHash returns the SHA-256 of a file in hex.
func fileHash(t testing.TB, path string) string {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	sum := sha256.Sum256(b)
	return hex.EncodeToString(sum[:])
}

// eventsOf returns the events of a run folder with the given kind.
func eventsOf(t testing.TB, dir, kind string) []record.Event {
	t.Helper()
	run, err := record.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	var out []record.Event
	for _, e := range run.Events {
		if e.Kind == kind {
			out = append(out, e)
		}
	}
	return out
}

// openRun opens a run folder that must have closed with a summary.
func openRun(t testing.TB, dir string) *record.Run {
	t.Helper()
	run, err := record.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	if run.Summary == nil {
		t.Fatalf("run folder %s has no summary: %s", dir, strings.Join(run.Notes, "; "))
	}
	return run
}

func inprocPair() (*inproc.End, *inproc.End) { return inproc.Pair() }
