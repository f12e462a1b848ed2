package reference

import (
	"errors"
	"fmt"
	"sync/atomic"
	"testing"
	"time"

	"golang.org/x/sys/unix"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/bridges/serial"
)

// A rig that stops reading (its host did not run it) fills the firmware's
// send queue: over a real pty, the rig's end here writes states and reads
// nothing, until the pty's buffers and the firmware's queue are full and
// its link refuses answers (serial.ErrSendQueueFull). The firmware must
// drop those answers, say so through Options.Dropped, and keep serving:
// once the rig reads again, a new state gets its answer and the rig's stop
// ends Serve normally. Before the fix Serve returned the link's error on
// the first refused answer, and the rig then waited in vain.
func TestServeDropsAnswersTheLinkCannotTake(t *testing.T) {
	p, err := serial.NewPty()
	if err != nil {
		t.Fatal(err)
	}
	defer p.Close()
	// The rig's end: the follower, raw (NewPty set it so), read only when
	// the test says. O_NONBLOCK makes a read with nothing waiting return
	// at once, so draining it cannot hang the test.
	rigFD, err := unix.Open(p.Path, unix.O_RDWR|unix.O_NOCTTY|unix.O_NONBLOCK|unix.O_CLOEXEC, 0)
	if err != nil {
		t.Fatal(err)
	}
	defer unix.Close(rigFD)
	if err := p.ReleaseFollower(); err != nil {
		t.Fatal(err)
	}
	// A small send queue, so it is the queue and not only the pty that
	// fills; the pty's own buffers hold some kilobytes before that.
	fw := serial.NewConn(p.Master, "pty master", serial.Config{SendQueueLen: 2})
	defer fw.Close()

	var dropped atomic.Uint64
	var dropErr atomic.Pointer[error]
	done := make(chan error, 1)
	go func() {
		done <- Serve(fw, Options{IdleTimeout: 10 * time.Second, Dropped: func(m *protocol.Message, err error) {
			if m.Type == protocol.TypeCommand || m.Type == protocol.TypeGreeting {
				dropped.Add(1)
			}
			dropErr.Store(&err)
		}})
	}()

	scratch := make([]byte, protocol.MaxFrameLen)
	write := func(m *protocol.Message) {
		t.Helper()
		b, err := protocol.AppendWire(nil, scratch, m)
		if err != nil {
			t.Fatal(err)
		}
		for len(b) > 0 {
			n, err := unix.Write(rigFD, b)
			if errors.Is(err, unix.EAGAIN) {
				time.Sleep(time.Millisecond) // the firmware has not read yet
				continue
			}
			if err != nil {
				t.Fatal(err)
			}
			b = b[n:]
		}
	}
	cfg := protocol.Message{Type: protocol.TypeConfig}
	cfg.Config = protocol.Config{TickHz: 1000, Lockstep: true, Joints: 2, WatchdogUS: 50000}
	st := protocol.Message{Type: protocol.TypeState}
	st.State = protocol.State{Joints: 2, Angle: [protocol.MaxJoints]float32{0.1, -0.4}, Contacts: protocol.ContactLeft}

	// The rig's reads: while nothing waits, again() is sent every 100 ms,
	// as a rig resends (a message may meet a firmware that is not ready,
	// or the draining backlog), within a generous bound for a broken
	// firmware.
	var again func()
	var sentAt, limit time.Time
	rd := protocol.NewReader(readerFunc(func(b []byte) (int, error) {
		for {
			n, err := unix.Read(rigFD, b)
			if !errors.Is(err, unix.EAGAIN) {
				return max(n, 0), err
			}
			select {
			case err := <-done:
				return 0, fmt.Errorf("Serve returned while the rig waited for an answer: %v", err)
			default:
			}
			if time.Now().After(limit) {
				return 0, errors.New("no answer within 30 s")
			}
			if time.Since(sentAt) > 100*time.Millisecond {
				again()
				sentAt = time.Now()
			}
			time.Sleep(time.Millisecond)
		}
	}))
	awaitCommand := func(seq uint32) {
		t.Helper()
		limit = time.Now().Add(30 * time.Second)
		var m protocol.Message
		for {
			frame, err := rd.Next()
			if err != nil {
				t.Fatalf("reading the answer to state %d (%d dropped): %v", seq, dropped.Load(), err)
			}
			if protocol.Decode(frame, &m) == nil && m.Type == protocol.TypeCommand && m.Seq == seq {
				return
			}
		}
	}

	// The session first, as a rig opens it: the config and a first state,
	// sent again until the state is answered, so the flood below meets a
	// configured firmware (one that never got the config answers nothing,
	// and nothing would fill).
	st.Seq = 1
	again = func() { write(&cfg); write(&st) }
	awaitCommand(1)

	// Counting, not timing: states go out until the firmware has dropped
	// some answers (a bound on the count and a generous one on time keep
	// a broken firmware from hanging the test).
	seq := uint32(1)
	for limit := time.Now().Add(30 * time.Second); dropped.Load() == 0; {
		select {
		case err := <-done:
			t.Fatalf("Serve returned while the rig was not reading: %v", err)
		default:
		}
		if seq > 200_000 || time.Now().After(limit) {
			t.Fatalf("no answer dropped after %d states: the rig's end was not filled", seq)
		}
		seq++
		st.Seq = seq
		write(&st)
	}
	if e := dropErr.Load(); e == nil || !errors.Is(*e, bridges.ErrSendBusy) {
		t.Fatalf("Dropped got %v, want an error wrapping bridges.ErrSendBusy", e)
	}
	t.Logf("%d answers dropped after %d states", dropped.Load(), seq)

	// The rig reads again: everything waiting is drained, and a new state
	// (as the rig's resend would be) gets its own answer.
	want := seq + 1
	st.Seq = want
	again = func() { write(&st) }
	sentAt = time.Time{}
	awaitCommand(want)
	stop := protocol.Message{Type: protocol.TypeStop, Seq: want, Stop: protocol.Stop{Reason: protocol.StopEnd}}
	write(&stop)
	select {
	case err := <-done:
		if err != nil {
			t.Fatalf("Serve after the rig's stop: %v, want nil", err)
		}
	case <-time.After(30 * time.Second):
		t.Fatal("Serve did not end within 30 s of the rig's stop")
	}
}

// readerFunc is an io.Reader made of a function.
type readerFunc func([]byte) (int, error)

func (f readerFunc) Read(b []byte) (int, error) { return f(b) }
