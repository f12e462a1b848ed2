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
		// The watchdog counts real time; 2 s keeps nominal runs from
		// tripping when other test binaries load the 2-core host. Tests of
		// the watchdog set their own.
		Watchdog: 2 * time.Second,
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

// newRecord creates a run folder in a temporary directory.
func newRecord(t testing.TB, cfg Config, m *plant.Model, s plant.State) *record.Writer {
	t.Helper()
	mf, err := Manifest(nil, cfg, m, s, "inproc", "test")
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
	rig, fwEnd := inproc.Pair()
	defer rig.Close()
	rec := newRecord(t, cfg, m, s)
	fwErr := make(chan error, 1)
	go func() { fwErr <- fw(fwEnd) }()
	res, err := Run(ctx, cfg, m, s, rig, rec)
	rig.Close()
	var ferr error
	select {
	case ferr = <-fwErr:
	case <-time.After(10 * time.Second):
		t.Fatal("test firmware did not end within 10 s of the run")
	}
	return res, rec.Dir(), err, ferr
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
