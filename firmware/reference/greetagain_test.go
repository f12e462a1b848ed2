package reference

import (
	"context"
	"errors"
	"sync"
	"testing"
	"time"

	"gaitrig/bridges/inproc"
	"gaitrig/bridges/protocol"
)

// With GreetAgain, Serve outlives a stop as a board does (docs/protocol.md
// section 6 item 5): after the first rig's stop it answers no state, greets
// again, serves a second rig with that rig's own torque limit (the first
// rig's lower limit is forgotten), reports each session to SessionEnded, and
// returns nil when its context ends.
func TestServeGreetsAgainAfterAStop(t *testing.T) {
	rig, fw := inproc.Pair()
	defer rig.Close()
	var mu sync.Mutex
	var ended []error
	ctx, cancel := context.WithCancel(context.Background())
	defer cancel()
	done := make(chan error, 1)
	go func() {
		done <- ServeContext(ctx, fw, Options{IdleTimeout: 30 * time.Second, GreetAgain: true,
			SessionEnded: func(err error) { mu.Lock(); ended = append(ended, err); mu.Unlock() }})
	}()
	var m protocol.Message
	recv := func(what string) protocol.Message {
		t.Helper()
		if err := rig.Recv(time.Now().Add(5*time.Second), &m); err != nil {
			t.Fatalf("%s: %v", what, err)
		}
		return m
	}
	// A torso pitched back with the left foot down: the stance hip torque
	// is clipped at the firmware's limit, which shows which limit it holds.
	st := protocol.Message{Type: protocol.TypeState}
	st.State = protocol.State{Joints: 2, Angle: [protocol.MaxJoints]float32{0.1, -0.4}, IMUPitch: 0.3, Contacts: protocol.ContactLeft}
	session := func(limit float32, stop protocol.Stop) {
		t.Helper()
		if g := recv("greeting"); g.Type != protocol.TypeGreeting {
			t.Fatalf("want a greeting, got type %#x", g.Type)
		}
		cfg := protocol.Message{Type: protocol.TypeConfig, Config: protocol.Config{TickHz: 1000, Lockstep: true, Joints: 2,
			TorqueLimit: [protocol.MaxJoints]float32{limit, limit}}}
		rig.Send(&cfg)
		for seq := uint32(1); seq <= 3; seq++ {
			st.Seq = seq
			rig.Send(&st)
			// Greetings sent before the config arrived may still be queued.
			for recv("command"); m.Type == protocol.TypeGreeting; recv("command") {
			}
			if m.Type != protocol.TypeCommand || m.Seq != seq {
				t.Fatalf("answer to state %d: type %#x seq %d", seq, m.Type, m.Seq)
			}
			if got := m.Command.Torque[0]; got != limit && got != -limit {
				t.Fatalf("stance torque %g with the rig's limit %g: the firmware does not hold this session's limit", got, limit)
			}
		}
		stopMsg := protocol.Message{Type: protocol.TypeStop, Seq: 3, Stop: stop}
		rig.Send(&stopMsg)
		st.Seq = 4
		rig.Send(&st) // after the stop: must not be answered
		if a := recv("after the stop"); a.Type != protocol.TypeGreeting || a.Seq != 0 {
			t.Fatalf("after the stop: type %#x seq %d, want a greeting (seq 0) and no command", a.Type, a.Seq)
		}
	}
	session(20, protocol.Stop{Reason: protocol.StopEnd, Text: "run finished"})
	session(35, protocol.Stop{Reason: protocol.StopEStop, Text: "e-stop: test"})
	cancel()
	select {
	case err := <-done:
		if err != nil {
			t.Fatalf("ServeContext returned %v when its context ended, want nil", err)
		}
	case <-time.After(5 * time.Second):
		t.Fatal("ServeContext did not return within 5 s of its context ending")
	}
	mu.Lock()
	defer mu.Unlock()
	if len(ended) != 2 || ended[0] != nil || !errors.Is(ended[1], ErrRigStopped) {
		t.Fatalf("sessions ended %v, want [nil, an ErrRigStopped]", ended)
	}
}

// With GreetAgain, a bench that goes quiet after its runs ends Serve
// normally after IdleTimeout; without a run it is still an error.
func TestServeGreetAgainIdleEnd(t *testing.T) {
	rig, fw := inproc.Pair()
	defer rig.Close()
	done := make(chan error, 1)
	go func() { done <- Serve(fw, Options{IdleTimeout: 300 * time.Millisecond, GreetAgain: true}) }()
	var m protocol.Message
	rig.Recv(time.Now().Add(5*time.Second), &m)
	cfg := protocol.Message{Type: protocol.TypeConfig, Config: protocol.Config{TickHz: 1000, Joints: 2}}
	rig.Send(&cfg)
	stop := protocol.Message{Type: protocol.TypeStop, Stop: protocol.Stop{Reason: protocol.StopEnd}}
	rig.Send(&stop)
	select {
	case err := <-done:
		if err != nil {
			t.Fatalf("Serve ended with %v after a served run and a quiet bench, want nil", err)
		}
	case <-time.After(10 * time.Second):
		t.Fatal("Serve did not end within 10 s with an idle timeout of 300 ms")
	}
	rig2, fw2 := inproc.Pair()
	defer rig2.Close()
	if err := Serve(fw2, Options{IdleTimeout: 50 * time.Millisecond, GreetAgain: true}); err == nil {
		t.Fatal("Serve returned nil although no rig ever spoke")
	}
}
