package hil

import (
	"context"
	"errors"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/bridges/serial"
	"gaitrig/firmware/reference"
	"gaitrig/internal/retrytest"
	"gaitrig/plant"
	"gaitrig/record"
)

// tapConn is the firmware's end of a link that keeps a copy of every
// message the firmware received, so a test can look at what the rig sent
// as the firmware decoded it.
type tapConn struct {
	bridges.Conn
	mu  sync.Mutex
	got []protocol.Message
}

func (c *tapConn) Recv(d time.Time, m *protocol.Message) error {
	err := c.Conn.Recv(d, m)
	if err == nil {
		c.mu.Lock()
		c.got = append(c.got, *m)
		c.mu.Unlock()
	}
	return err
}

func (c *tapConn) received() []protocol.Message {
	c.mu.Lock()
	defer c.mu.Unlock()
	return append([]protocol.Message(nil), c.got...)
}

// runOverPty runs the loop with the rig on a real pseudo-terminal (the
// serial link, COBS and the decoder in between) and fw on its master end.
func runOverPty(t *testing.T, cfg Config, m *plant.Model, s plant.State, fw firmwareFunc) (Result, string, error, error) {
	t.Helper()
	p, err := serial.NewPty()
	if err != nil {
		t.Fatal(err)
	}
	defer p.Close()
	rig, err := serial.Open(serial.Config{Port: p.Path})
	if err != nil {
		t.Fatal(err)
	}
	defer rig.Close()
	if err := p.ReleaseFollower(); err != nil {
		t.Fatal(err)
	}
	fwEnd := serial.NewConn(p.Master, "pty master", serial.Config{})
	defer fwEnd.Close()
	rec := newRecord(t, cfg, m, s)
	fwErr := make(chan error, 1)
	go func() { fwErr <- fw(fwEnd) }()
	res, err := Run(context.Background(), cfg, m, s, rig, rec)
	// The port stays open until the firmware has read the rig's stop: a
	// pty drops what its leader has not read once the follower closes.
	var ferr error
	select {
	case ferr = <-fwErr:
	case <-time.After(10 * time.Second):
		t.Fatal("the firmware did not end within 10 s of the run")
	}
	rig.Close()
	return res, rec.Dir(), err, ferr
}

// The rig serves each firmware in the version its greeting gives
// (docs/protocol.md section 8), over a real pty: a version-1 board gets
// the version-1 config (no watchdog) and every frame in version 1, and
// walks; a version-2 board gets every frame in version 2 and a config whose
// watchdog_us is the watchdog the rig enforces. The manifest records the
// version the firmware greeted with.
func TestEachVersionServedOverPty(t *testing.T) {
	for _, v := range []uint8{1, 2} {
		t.Run("v"+string(rune('0'+v)), func(t *testing.T) {
			m, s, cfg := demo(t, 3)
			cfg.Watchdog = 1500*time.Millisecond + 250*time.Microsecond + 999 // the rig enforces exactly this
			type ptyRun struct {
				res Result
				dir string
				tap *tapConn
			}
			// Each attempt is a fresh pty and firmware. The firmware of a
			// run the host spoiled may fail to send its last answers into a
			// port the stopped rig no longer reads; that says nothing about
			// the protocol version, so its error is logged, not judged.
			r := retrytest.UntilValid(t, "a version-"+string(rune('0'+v))+" firmware over a pty", func(int) (ptyRun, record.Summary) {
				var tap *tapConn
				fw := func(conn bridges.Conn) error {
					tap = &tapConn{Conn: conn}
					return reference.Serve(tap, reference.Options{Protocol: v, IdleTimeout: 5 * time.Second})
				}
				res, dir, err, ferr := runOverPty(t, cfg, m, s, fw)
				if err != nil {
					t.Fatalf("run: %v; firmware: %v", err, ferr)
				}
				if ferr != nil && res.Summary.Outcome == record.Invalid {
					t.Logf("the firmware of the invalid run ended with %v", ferr)
				} else if ferr != nil {
					t.Fatalf("run outcome %s; firmware: %v", res.Summary.Outcome, ferr)
				}
				return ptyRun{res: res, dir: dir, tap: tap}, res.Summary
			})
			res, dir, tap := r.res, r.dir, r.tap
			if res.Summary.Outcome != record.Pass || res.Summary.Steps < 3 {
				t.Fatalf("outcome %s after %d steps (%s); a version-%d firmware must walk", res.Summary.Outcome, res.Summary.Steps, res.Summary.Reason, v)
			}
			var configs, others int
			for _, got := range tap.received() {
				if got.Version != v {
					others++
				}
				if got.Type != protocol.TypeConfig {
					continue
				}
				configs++
				want := uint32(0) // a version-1 config has no watchdog field
				if v == 2 {
					want = 1_500_250 // 1.500250999 s in whole microseconds, rounded down
				}
				if got.Config.WatchdogUS != want || !got.Config.Lockstep || got.Config.TickHz != 1000 {
					t.Errorf("config %+v: want watchdog_us %d, lockstep, 1000 Hz", got.Config, want)
				}
			}
			if configs == 0 || others != 0 {
				t.Errorf("the firmware received %d configs and %d frames of a version other than %d", configs, others, v)
			}
			if g := openRun(t, dir).Manifest.Greeting; g.Protocol != int(v) {
				t.Errorf("manifest greeting %+v: want protocol %d", g, v)
			}
		})
	}
}

// The config message does not touch the plant: the same lockstep run
// against a version-1 and a version-2 firmware writes the same telemetry
// bit for bit.
func TestVersionsWalkTheSame(t *testing.T) {
	hashes := map[uint8]string{}
	for _, v := range []uint8{1, 2} {
		m, s, cfg := demo(t, 4)
		fw := func(conn bridges.Conn) error {
			return reference.Serve(conn, reference.Options{Protocol: v, IdleTimeout: 5 * time.Second})
		}
		res, run, _ := runAndRead(t, context.Background(), cfg, m, s, fw)
		if res.Summary.Outcome != record.Pass {
			t.Fatalf("v%d: outcome %s (%s)", v, res.Summary.Outcome, res.Summary.Reason)
		}
		hashes[v] = fileHash(t, filepath.Join(run.Dir, record.TelemetryFile))
	}
	if hashes[1] != hashes[2] {
		t.Errorf("telemetry differs between a version-1 and a version-2 firmware: %s vs %s", hashes[1], hashes[2])
	}
}

// WatchdogMicros against the arithmetic written out by hand: whole
// microseconds rounded down, never 0, saturating at the largest u32.
func TestWatchdogMicros(t *testing.T) {
	tests := []struct {
		d    time.Duration
		want uint32
	}{
		{50 * time.Millisecond, 50000},
		{time.Second, 1000000},
		{1999 * time.Nanosecond, 1},
		{0, 1},
		{time.Nanosecond, 1},
		{4294967295 * time.Microsecond, 4294967295},
		{2 * time.Hour, 4294967295},
	}
	for _, tc := range tests {
		if got := WatchdogMicros(tc.d); got != tc.want {
			t.Errorf("WatchdogMicros(%v) = %d, want %d", tc.d, got, tc.want)
		}
	}
}

// After the greeting agreed version 2, a command framed in version 1 is a
// broken frame (bad_frame, a warning), not a version mismatch: the run goes
// on, the resent state is answered properly, and the alarm says which
// version the session speaks. This goes through the session's own gate,
// the same on every link.
func TestOtherVersionFrameMidRunGoesThroughTheGate(t *testing.T) {
	cfg, run := shortRun(t, 60)
	sent := false
	fw := hooked(func(conn bridges.Conn, seq uint32, out *protocol.Command) bool {
		if seq == 30 && !sent {
			sent = true
			wrong := protocol.Message{Version: 1, Type: protocol.TypeCommand, Seq: seq, Command: *out}
			wrong.Command.Joints = 2
			conn.Send(&wrong)
			return false // the rig resends state 30; the next answer is proper
		}
		return true
	}, nil)
	res, _, dir := run(cfg, fw)
	if res.Summary.Outcome == record.Tripped || res.Summary.Ticks != 60 {
		t.Fatalf("outcome %s after %d ticks (%s)", res.Summary.Outcome, res.Summary.Ticks, res.Summary.Reason)
	}
	if res.Summary.Alarms[AlarmBadFrame] != 1 || res.Summary.Alarms[AlarmVersionMismatch] != 0 {
		t.Fatalf("alarms %v: want one bad_frame and no version_mismatch", res.Summary.Alarms)
	}
	ev := eventsOf(t, dir, AlarmBadFrame)
	if len(ev) != 1 || !strings.Contains(ev[0].Message, "frame speaks version 1, this session speaks version 2") {
		t.Fatalf("bad_frame events %+v", ev)
	}
}

// fixedConn is a link whose every Recv delivers the same message: the
// smallest stand-in for a real link when only the gate above it is
// measured.
type fixedConn struct {
	bridges.Conn
	m protocol.Message
}

func (c *fixedConn) Recv(_ time.Time, m *protocol.Message) error { *m = c.m; return nil }

// The gate costs a tick no allocation for a frame of the agreed version
// (the tick loop is allocation-free), and refuses one of another version.
func TestVersionGateAllocatesNothing(t *testing.T) {
	var ss session
	link := &fixedConn{m: protocol.Message{Version: 2, Type: protocol.TypeCommand, Seq: 5, Command: protocol.Command{Joints: 2}}}
	g := ss.gated(link)
	ss.gate.version.Store(2)
	var m protocol.Message
	if n := testing.AllocsPerRun(200, func() {
		if err := g.Recv(time.Time{}, &m); err != nil {
			t.Fatal(err)
		}
	}); n != 0 {
		t.Errorf("versionGate.Recv allocates %v times per frame of the agreed version, want 0", n)
	}
	link.m.Version = 1
	var fe *bridges.FrameError
	if err := g.Recv(time.Time{}, &m); !errors.As(err, &fe) || !errors.Is(err, protocol.ErrVersion) {
		t.Errorf("a version-1 frame in a version-2 session: err %v, want a frame error wrapping ErrVersion", err)
	}
	ss.gate.version.Store(0) // before the greeting: every version passes
	if err := g.Recv(time.Time{}, &m); err != nil {
		t.Errorf("before the greeting: %v", err)
	}
}
