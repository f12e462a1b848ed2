package serial

import (
	"errors"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
)

// Every test here runs over a real pseudo-terminal pair: the rig side opens
// the follower by path with go.bug.st/serial (Open), the firmware side is the
// pty master (NewConn). Every wait has a deadline.

func messages() []protocol.Message {
	return []protocol.Message{
		{Type: protocol.TypeGreeting, Greeting: protocol.Greeting{Version: 1, Actuators: 2, Name: "bench-walker", Build: "fw-0.3.1"}},
		{Type: protocol.TypeConfig, Config: protocol.Config{TickHz: 1000, Lockstep: true, Joints: 2,
			JointNames: [protocol.MaxJoints]string{"hip_left", "hip_right"}, TorqueLimit: [protocol.MaxJoints]float32{40, 40}, WatchdogUS: 50000}},
		{Type: protocol.TypeState, Seq: 77, State: protocol.State{TimeUS: 76000, Joints: 2,
			Angle: [protocol.MaxJoints]float32{0.3, -0.2}, Rate: [protocol.MaxJoints]float32{1, -2}, IMUPitch: -0.05, IMURate: 0.1, Contacts: protocol.ContactRight}},
		{Type: protocol.TypeCommand, Seq: 77, Command: protocol.Command{Joints: 2, Torque: [protocol.MaxJoints]float32{2.5, -4}, Status: protocol.StatusSafeMode}},
		{Type: protocol.TypeHeartbeat, Seq: 77},
		{Type: protocol.TypeStop, Seq: 78, Stop: protocol.Stop{Reason: protocol.StopEnd, Text: "scenario complete"}},
	}
}

type pair struct {
	pty *Pty
	rig *Conn // follower, opened by path
	fw  *Conn // master
}

func newPair(t *testing.T, cfg Config) *pair {
	t.Helper()
	p, err := NewPty()
	if err != nil {
		t.Fatal(err)
	}
	cfg.Port = p.Path
	rig, err := Open(cfg)
	if err != nil {
		p.Close()
		t.Fatal(err)
	}
	if err := p.ReleaseFollower(); err != nil {
		t.Fatal(err)
	}
	fw := NewConn(p.Master, "pty master", Config{})
	t.Cleanup(func() {
		rig.Close()
		fw.Close()
	})
	return &pair{pty: p, rig: rig, fw: fw}
}

// same compares what a message of its type means: header and the matching
// part.
func same(a, b protocol.Message) bool {
	if a.Type != b.Type || a.Seq != b.Seq {
		return false
	}
	switch a.Type {
	case protocol.TypeGreeting:
		return a.Greeting == b.Greeting
	case protocol.TypeConfig:
		return a.Config == b.Config
	case protocol.TypeState:
		return a.State == b.State
	case protocol.TypeCommand:
		return a.Command == b.Command
	case protocol.TypeStop:
		return a.Stop == b.Stop
	}
	return true
}

// soon is the deadline of a wait for something that will come: a bound on
// a hang on a busy host, never a timing check.
func soon() time.Time { return time.Now().Add(20 * time.Second) }

// recvMsg waits for a message, skipping nothing: any error fails the test.
func recvMsg(t *testing.T, c *Conn) protocol.Message {
	t.Helper()
	var m protocol.Message
	if err := c.Recv(soon(), &m); err != nil {
		t.Fatalf("Recv: %v", err)
	}
	return m
}

func TestRoundTripEveryMessage(t *testing.T) {
	p := newPair(t, Config{})
	for _, dir := range []struct {
		name     string
		from, to *Conn
	}{{"rig to firmware", p.rig, p.fw}, {"firmware to rig", p.fw, p.rig}} {
		for _, m := range messages() {
			if err := dir.from.Send(&m); err != nil {
				t.Fatalf("%s: Send %v: %v", dir.name, m.Type, err)
			}
			if got := recvMsg(t, dir.to); !same(got, m) {
				t.Errorf("%s %v:\n got %+v\nwant %+v", dir.name, m.Type, got, m)
			}
		}
	}
	// A sender counts a frame after its write returns, which can be after
	// the peer has read it: wait for the counts, not for a moment.
	rs := settled(t, p.rig, func(s bridges.Stats) bool { return s.FramesSent >= 6 })
	fs := settled(t, p.fw, func(s bridges.Stats) bool { return s.FramesSent >= 6 })
	if rs.FramesSent != 6 || rs.FramesReceived != 6 || fs.FramesSent != 6 || fs.FramesReceived != 6 {
		t.Errorf("stats: rig %+v, firmware %+v", rs, fs)
	}
	if rs.FrameErrors != 0 || fs.FrameErrors != 0 || rs.BytesReceived != fs.BytesSent || fs.BytesReceived != rs.BytesSent {
		t.Errorf("byte counts or errors disagree: rig %+v, firmware %+v", rs, fs)
	}
}

// settled returns c's counters once done holds for them. The writer
// goroutine updates them after the write that made a frame visible to the
// peer, so a test that has seen the frame arrive may still be ahead of the
// count; it fails after a generous bound (a lost count, not a slow host).
func settled(t *testing.T, c *Conn, done func(bridges.Stats) bool) bridges.Stats {
	t.Helper()
	limit := time.Now().Add(30 * time.Second)
	for {
		s := c.Stats()
		if done(s) {
			return s
		}
		if time.Now().After(limit) {
			t.Fatalf("counters never settled: %+v", s)
		}
		time.Sleep(time.Millisecond)
	}
}

func wireOf(t *testing.T, m protocol.Message) []byte {
	t.Helper()
	w, err := protocol.AppendWire(nil, make([]byte, protocol.MaxFrameLen), &m)
	if err != nil {
		t.Fatal(err)
	}
	return w
}

// rawFrame encodes m and lets mutate change the frame before COBS; with
// fixCRC the CRC is recomputed.
func rawFrame(t *testing.T, m protocol.Message, mutate func([]byte) []byte, fixCRC bool) []byte {
	t.Helper()
	f := make([]byte, protocol.MaxFrameLen)
	n, err := protocol.Encode(f, &m)
	if err != nil {
		t.Fatal(err)
	}
	b := mutate(f[:n])
	if fixCRC {
		c := protocol.CRC16(b[:len(b)-2])
		b[len(b)-2], b[len(b)-1] = byte(c), byte(c>>8)
	}
	enc := make([]byte, protocol.COBSMaxLen(len(b))+1)
	k, _ := protocol.EncodeCOBS(enc, b)
	return enc[:k+1]
}

func TestBadFramesThenGoodFrame(t *testing.T) {
	cmd := messages()[3]
	tests := []struct {
		name   string
		bytes  []byte
		reason string
		kind   error // the protocol sentinel the FrameError unwraps to
	}{
		{"bad CRC", rawFrame(t, cmd, func(b []byte) []byte { b[12] ^= 1; return b }, false), "bad CRC: got 0x", protocol.ErrBadCRC},
		{"truncated", rawFrame(t, cmd, func(b []byte) []byte { return b[:30] }, false), "truncated command frame", protocol.ErrTruncated},
		{"wrong type", rawFrame(t, cmd, func(b []byte) []byte { b[1] = 0x66; return b }, true), "unknown message type 0x66", protocol.ErrUnknownType},
		{"wrong version", rawFrame(t, cmd, func(b []byte) []byte { b[0] = 9; return b }, true), "frame speaks version 9, this side speaks versions 1 to 2", protocol.ErrVersion},
		{"bad COBS", []byte{0x07, 0x01, 0x02, 0x00}, "bad COBS", protocol.ErrCOBS},
		{"too many joints", rawFrame(t, cmd, func(b []byte) []byte { b[8] = 12; return b }, true), "joints 12 is outside 1…8", protocol.ErrTooManyJoints},
	}
	p := newPair(t, Config{})
	for i, tc := range tests {
		if _, err := p.pty.Master.Write(tc.bytes); err != nil {
			t.Fatal(err)
		}
		var m protocol.Message
		err := p.rig.Recv(soon(), &m)
		var fe *bridges.FrameError
		if !errors.As(err, &fe) || !strings.Contains(fe.Reason, tc.reason) || fe.Bytes == 0 {
			t.Fatalf("%s: err = %v, want a FrameError mentioning %q", tc.name, err, tc.reason)
		}
		if !errors.Is(err, tc.kind) {
			t.Errorf("%s: FrameError does not unwrap to %v", tc.name, tc.kind)
		}
		// The link stays usable: the next good frame arrives.
		good := cmd
		good.Seq = uint32(100 + i)
		if err := p.fw.Send(&good); err != nil {
			t.Fatal(err)
		}
		if got := recvMsg(t, p.rig); !same(got, good) {
			t.Fatalf("%s: after the bad frame got %+v", tc.name, got)
		}
	}
	if got := p.rig.Stats().FrameErrors; got != uint64(len(tests)) {
		t.Errorf("FrameErrors = %d, want %d", got, len(tests))
	}
}

func TestGarbageBetweenFramesResyncs(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	p := newPair(t, Config{QueueLen: 1024})
	const rounds = 50
	var sent []protocol.Message
	var stream []byte
	for i := range rounds {
		g := make([]byte, rng.IntN(300))
		for j := range g {
			g[j] = byte(rng.Uint32())
		}
		stream = append(stream, g...)
		stream = append(stream, 0) // the sender's delimiter before a frame
		m := messages()[3]
		m.Seq = uint32(i)
		m.Command.Torque[0] = float32(i)
		sent = append(sent, m)
		stream = append(stream, wireOf(t, m)...)
	}
	go func() { p.pty.Master.Write(stream) }()
	got := 0
	for got < rounds {
		var m protocol.Message
		err := p.rig.Recv(soon(), &m)
		var fe *bridges.FrameError
		switch {
		case errors.As(err, &fe):
			continue
		case err != nil:
			t.Fatalf("after %d good frames: %v", got, err)
		}
		if !same(m, sent[got]) {
			t.Fatalf("frame %d: got %+v, want %+v", got, m, sent[got])
		}
		got++
	}
	s := p.rig.Stats()
	if s.FrameErrors == 0 || s.FramesReceived != rounds || s.BytesReceived != uint64(len(stream))+p.fw.Stats().BytesSent {
		t.Errorf("stats %+v (stream %d bytes)", s, len(stream))
	}
}

func TestFloodingPeerBoundedQueue(t *testing.T) {
	const queue = 32
	const n = 20000
	p := newPair(t, Config{QueueLen: queue})
	var stream []byte
	for i := range n {
		m := messages()[3]
		m.Seq = uint32(i)
		stream = append(stream, wireOf(t, m)...)
	}
	done := make(chan error, 1)
	go func() { _, err := p.pty.Master.Write(stream); done <- err }()
	// The rig does not read while the flood arrives; its reader must keep
	// up with the bytes and drop the oldest messages.
	deadline := time.Now().Add(8 * time.Second)
	for p.rig.Stats().FramesReceived < n {
		if time.Now().After(deadline) {
			t.Fatalf("reader fell behind: %+v", p.rig.Stats())
		}
		time.Sleep(5 * time.Millisecond)
	}
	if err := <-done; err != nil {
		t.Fatal(err)
	}
	delivered := 0
	last := uint32(0)
	for {
		var m protocol.Message
		err := p.rig.Recv(time.Now().Add(50*time.Millisecond), &m)
		if errors.Is(err, bridges.ErrTimeout) {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		delivered++
		last = m.Seq
	}
	s := p.rig.Stats()
	if delivered > queue || delivered == 0 {
		t.Errorf("delivered %d messages after the flood, queue holds %d", delivered, queue)
	}
	if uint64(delivered)+s.Dropped != n {
		t.Errorf("delivered %d + dropped %d != sent %d", delivered, s.Dropped, n)
	}
	if last != n-1 {
		t.Errorf("newest message seq %d, want %d (oldest must be dropped first)", last, n-1)
	}
}

func TestSilentPeerTimesOut(t *testing.T) {
	p := newPair(t, Config{})
	for _, wait := range []time.Duration{0, 20 * time.Millisecond, 100 * time.Millisecond} {
		start := time.Now()
		var m protocol.Message
		err := p.rig.Recv(start.Add(wait), &m)
		if err != bridges.ErrTimeout {
			t.Fatalf("wait %v: err = %v, want ErrTimeout", wait, err)
		}
		if el := time.Since(start); el < wait {
			t.Fatalf("wait %v: returned after %v, before the deadline", wait, el)
		}
	}
}

func waitEvent(t *testing.T, c *Conn, kind bridges.LinkEventKind) bridges.LinkEvent {
	t.Helper()
	select {
	case e := <-c.Events():
		if e.Kind != kind {
			t.Fatalf("event %q, want %q (%+v)", e.Kind, kind, e)
		}
		return e
	case <-time.After(3 * time.Second):
		t.Fatalf("no %q event", kind)
	}
	return bridges.LinkEvent{}
}

func TestUnplugMidRun(t *testing.T) {
	p := newPair(t, Config{ReconnectWait: 10 * time.Millisecond})
	st := messages()[2]
	if err := p.rig.Send(&st); err != nil {
		t.Fatal(err)
	}
	recvMsg(t, p.fw)
	// Pull the cable: the pty master goes away.
	p.fw.Close()
	var m protocol.Message
	err := p.rig.Recv(soon(), &m)
	if !errors.Is(err, bridges.ErrDisconnected) || !strings.Contains(err.Error(), p.pty.Path) {
		t.Fatalf("Recv after unplug: %v, want ErrDisconnected naming %s", err, p.pty.Path)
	}
	e := waitEvent(t, p.rig, bridges.LinkDisconnected)
	if e.Err == nil {
		t.Error("disconnected event without a cause")
	}
	if err := p.rig.Send(&st); !errors.Is(err, bridges.ErrDisconnected) {
		t.Errorf("Send while down: %v", err)
	}
	err = p.rig.Recv(time.Now().Add(30*time.Millisecond), &m)
	if !errors.Is(err, bridges.ErrTimeout) || !errors.Is(err, bridges.ErrDisconnected) {
		t.Errorf("Recv while down: %v, want ErrTimeout and ErrDisconnected", err)
	}
	if p.rig.Up() {
		t.Error("Up() true after unplug")
	}
	p.rig.Close()
	if err := p.rig.Recv(soon(), &m); err != bridges.ErrClosed {
		t.Errorf("Recv after Close: %v", err)
	}
}

func TestRigSideCloseEndsFirmwareConn(t *testing.T) {
	p := newPair(t, Config{})
	p.rig.Close()
	var m protocol.Message
	err := p.fw.Recv(soon(), &m)
	if !errors.Is(err, bridges.ErrDisconnected) {
		t.Fatalf("firmware Recv after the rig closed: %v", err)
	}
	waitEvent(t, p.fw, bridges.LinkDisconnected)
	if err := p.fw.Recv(soon(), &m); err != bridges.ErrClosed {
		t.Fatalf("then: %v, want ErrClosed", err)
	}
}

// TestReconnectAfterUnplug replugs the "cable": the rig opens a stable path
// (a symlink, as udev gives a board), the first pty goes away, and a new pty
// appears behind the same path.
func TestReconnectAfterUnplug(t *testing.T) {
	dir := t.TempDir()
	link := filepath.Join(dir, "ttyRIG")
	repoint := func(target string) {
		tmp := link + ".new"
		os.Remove(tmp)
		if err := os.Symlink(target, tmp); err != nil {
			t.Fatal(err)
		}
		if err := os.Rename(tmp, link); err != nil {
			t.Fatal(err)
		}
	}
	p1, err := NewPty()
	if err != nil {
		t.Fatal(err)
	}
	repoint(p1.Path)
	rig, err := Open(Config{Port: link, ReconnectWait: 5 * time.Millisecond})
	if err != nil {
		t.Fatal(err)
	}
	defer rig.Close()
	p1.ReleaseFollower()
	fw1 := NewConn(p1.Master, "pty1", Config{})
	cmd := messages()[3]
	if err := fw1.Send(&cmd); err != nil {
		t.Fatal(err)
	}
	recvMsg(t, rig)

	fw1.Close() // unplug
	waitEvent(t, rig, bridges.LinkDisconnected)
	time.Sleep(30 * time.Millisecond) // the rig retries against a dead path meanwhile
	p2, err := NewPty()
	if err != nil {
		t.Fatal(err)
	}
	repoint(p2.Path)
	e := waitEvent(t, rig, bridges.LinkReconnected)
	if e.Gap < 30*time.Millisecond {
		t.Errorf("gap %v, want at least the 30 ms the cable was out", e.Gap)
	}
	p2.ReleaseFollower()
	fw2 := NewConn(p2.Master, "pty2", Config{})
	defer fw2.Close()
	// The disconnect error is still queued in order; then traffic resumes.
	var m protocol.Message
	if err := rig.Recv(soon(), &m); !errors.Is(err, bridges.ErrDisconnected) {
		t.Fatalf("queued disconnect: %v", err)
	}
	cmd.Seq = 2
	if err := fw2.Send(&cmd); err != nil {
		t.Fatal(err)
	}
	if got := recvMsg(t, rig); !same(got, cmd) {
		t.Fatalf("after reconnect got %+v", got)
	}
	st := messages()[2]
	if err := rig.Send(&st); err != nil {
		t.Fatal(err)
	}
	if got := recvMsg(t, fw2); !same(got, st) {
		t.Fatalf("firmware after reconnect got %+v", got)
	}
	if r := rig.Stats().Reconnects; r != 1 {
		t.Errorf("Reconnects = %d", r)
	}
}

func TestOpenErrors(t *testing.T) {
	missing := filepath.Join(t.TempDir(), "no-such-tty")
	tests := []struct {
		name string
		cfg  Config
		want string
	}{
		{"no port", Config{}, "no port given"},
		{"missing", Config{Port: missing}, missing},
		{"missing with wait", Config{Port: missing, OpenTimeout: 30 * time.Millisecond, ReconnectWait: 5 * time.Millisecond}, "no such file"},
		{"not a tty", Config{Port: "/dev/null"}, "/dev/null"},
	}
	for _, tc := range tests {
		c, err := Open(tc.cfg)
		if err == nil {
			c.Close()
			t.Errorf("%s: Open succeeded", tc.name)
			continue
		}
		if !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: %v, want mention of %q", tc.name, err, tc.want)
		}
	}
}

func TestSendDoesNotBlockWhenPeerStopsReading(t *testing.T) {
	// The rig's peer is a pty master that nobody reads.
	pt, err := NewPty()
	if err != nil {
		t.Fatal(err)
	}
	defer pt.Close()
	rig, err := Open(Config{Port: pt.Path, SendQueueLen: 4})
	if err != nil {
		t.Fatal(err)
	}
	defer rig.Close()
	p := &pair{rig: rig}
	st := messages()[2]
	deadline := time.Now().Add(5 * time.Second)
	for {
		err := p.rig.Send(&st)
		if errors.Is(err, ErrSendQueueFull) {
			// The same refusal in the words every link uses.
			if !errors.Is(err, bridges.ErrSendBusy) {
				t.Errorf("%v does not wrap bridges.ErrSendBusy", err)
			}
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		if time.Now().After(deadline) {
			t.Fatal("Send never reported a full queue")
		}
		time.Sleep(10 * time.Microsecond)
	}
}

func TestEncodeErrorIsReturned(t *testing.T) {
	p := newPair(t, Config{})
	bad := protocol.Message{Type: protocol.TypeCommand, Command: protocol.Command{Joints: 20}}
	if err := p.rig.Send(&bad); !errors.Is(err, protocol.ErrTooManyJoints) {
		t.Fatalf("Send of a bad message: %v", err)
	}
	good := messages()[4]
	if err := p.rig.Send(&good); err != nil {
		t.Fatal(err)
	}
	if got := recvMsg(t, p.fw); !same(got, good) {
		t.Fatalf("got %+v", got)
	}
}

// TestCloseWhileBusy closes both ends while a sender and a receiver are
// working on each; every call must return (no hang, no panic) and Recv must
// end with ErrClosed or a disconnect.
func TestCloseWhileBusy(t *testing.T) {
	p := newPair(t, Config{})
	go echoFirmware(p.fw)
	stop := make(chan struct{})
	sendDone := make(chan struct{})
	go func() {
		defer close(sendDone)
		st := messages()[2]
		for i := uint32(0); ; i++ {
			select {
			case <-stop:
				return
			default:
			}
			st.Seq = i
			if err := p.rig.Send(&st); errors.Is(err, bridges.ErrClosed) {
				return
			}
			time.Sleep(100 * time.Microsecond)
		}
	}()
	recvDone := make(chan error, 1)
	go func() {
		var m protocol.Message
		for {
			err := p.rig.Recv(time.Time{}, &m) // no deadline: only Close ends it
			if errors.Is(err, bridges.ErrClosed) {
				recvDone <- err
				return
			}
		}
	}()
	time.Sleep(50 * time.Millisecond)
	if p.rig.Stats().FramesReceived == 0 {
		t.Error("no commands came back before Close")
	}
	p.rig.Close()
	p.fw.Close()
	select {
	case <-recvDone:
	case <-time.After(3 * time.Second):
		t.Fatal("Recv without deadline did not return after Close")
	}
	close(stop)
	select {
	case <-sendDone:
	case <-time.After(3 * time.Second):
		t.Fatal("sender did not finish")
	}
	if err := p.rig.Close(); err != nil {
		t.Errorf("second Close: %v", err)
	}
}

// TestCloseWritesQueuedFrames: frames queued just before Close, the last a
// stop, all reach the peer. The rig's side is paced at 9600 baud, so the
// queue is still being written when Close is called (about 30 ms a frame):
// a Close that dropped the queue would lose the stop, and a board that never
// hears it stays in the old session and greets no next rig.
func TestCloseWritesQueuedFrames(t *testing.T) {
	p := newPair(t, Config{Baud: 9600, Pace: true})
	all := messages()
	var stop protocol.Message
	for _, m := range all {
		if m.Type == protocol.TypeStop {
			stop = m
		}
	}
	queued := []protocol.Message{all[2], all[2], all[2], stop}
	for i := range queued {
		if err := p.rig.Send(&queued[i]); err != nil {
			t.Fatal(err)
		}
	}
	if err := p.rig.Close(); err != nil {
		t.Fatal(err)
	}
	for i, want := range queued {
		if got := recvMsg(t, p.fw); !same(got, want) {
			t.Fatalf("frame %d: got %+v, want %+v", i, got, want)
		}
	}
}
