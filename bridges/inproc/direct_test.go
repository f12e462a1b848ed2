package inproc

import (
	"errors"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
)

// echo is a minimal firmware: it answers each state with a command echoing
// its seq and ends on stop.
type echo struct{ out protocol.Message }

func (e *echo) Greeting() *protocol.Message {
	e.out = protocol.Message{Type: protocol.TypeGreeting, Greeting: protocol.Greeting{Version: protocol.Version, Actuators: 1}}
	return &e.out
}

func (e *echo) Handle(in *protocol.Message) (*protocol.Message, bool, error) {
	switch in.Type {
	case protocol.TypeState:
		e.out = protocol.Message{Type: protocol.TypeCommand, Seq: in.Seq, Command: protocol.Command{Joints: 1}}
		e.out.Command.Torque[0] = float32(in.Seq)
		return &e.out, false, nil
	case protocol.TypeStop:
		return nil, true, nil
	}
	return nil, false, nil
}

func TestDirectAnswersInsideSend(t *testing.T) {
	d := NewDirect(&echo{})
	var m protocol.Message
	if err := d.Recv(time.Time{}, &m); err != nil || m.Type != protocol.TypeGreeting {
		t.Fatalf("first Recv = %v, %v; want the greeting", m.Type, err)
	}
	if err := d.Recv(time.Time{}, &m); !errors.Is(err, bridges.ErrTimeout) {
		t.Fatalf("Recv with nothing waiting = %v, want ErrTimeout", err)
	}
	for seq := uint32(1); seq <= 3; seq++ {
		if err := d.Send(&protocol.Message{Type: protocol.TypeState, Seq: seq}); err != nil {
			t.Fatal(err)
		}
		if err := d.Recv(time.Time{}, &m); err != nil || m.Type != protocol.TypeCommand || m.Seq != seq || m.Command.Torque[0] != float32(seq) {
			t.Fatalf("answer to state %d = %+v, %v", seq, m.Command, err)
		}
	}
	d.Send(&protocol.Message{Type: protocol.TypeStop})
	if ended, err := d.Ended(); !ended || err != nil {
		t.Errorf("after stop: ended %v, %v", ended, err)
	}
	d.Send(&protocol.Message{Type: protocol.TypeState, Seq: 9})
	if err := d.Recv(time.Time{}, &m); !errors.Is(err, bridges.ErrTimeout) {
		t.Errorf("a firmware that ended answered anyway: %+v", m)
	}
	if s := d.Stats(); s.FramesSent != 5 || s.FramesReceived != 4 {
		t.Errorf("stats %+v, want 5 sent and 4 received", s)
	}
	d.Close()
	if err := d.Send(&m); !errors.Is(err, bridges.ErrClosed) {
		t.Errorf("Send after Close = %v", err)
	}
	if err := d.Recv(time.Time{}, &m); !errors.Is(err, bridges.ErrClosed) {
		t.Errorf("Recv after Close = %v", err)
	}
}

func TestDirectKeepsTheNewestAnswers(t *testing.T) {
	d := NewDirect(&echo{})
	for seq := uint32(1); seq <= directQueue+3; seq++ {
		d.Send(&protocol.Message{Type: protocol.TypeState, Seq: seq})
	}
	var m protocol.Message
	d.Recv(time.Time{}, &m)
	if m.Seq != 4 { // the greeting and the first answers were discarded
		t.Errorf("oldest kept answer has seq %d, want 4", m.Seq)
	}
	if s := d.Stats(); s.Dropped != 4 {
		t.Errorf("dropped %d, want 4", s.Dropped)
	}
}

func TestDirectSendDoesNotAllocate(t *testing.T) {
	d := NewDirect(&echo{})
	var m protocol.Message
	d.Recv(time.Time{}, &m)
	st := protocol.Message{Type: protocol.TypeState}
	allocs := testing.AllocsPerRun(1000, func() {
		st.Seq++
		d.Send(&st)
		d.Recv(time.Time{}, &m)
	})
	if allocs != 0 {
		t.Errorf("%v allocations per exchange, want 0", allocs)
	}
}

func TestDirectRecvWakesOnClose(t *testing.T) {
	d := NewDirect(&echo{})
	var m protocol.Message
	d.Recv(time.Time{}, &m) // the greeting
	go func() {
		time.Sleep(20 * time.Millisecond)
		d.Close()
	}()
	start := time.Now()
	err := d.Recv(time.Now().Add(5*time.Second), &m)
	if !errors.Is(err, bridges.ErrClosed) {
		t.Fatalf("Recv during Close = %v, want ErrClosed", err)
	}
	if took := time.Since(start); took > 2*time.Second {
		t.Errorf("Recv noticed Close only after %v", took)
	}
}
