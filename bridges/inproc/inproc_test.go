package inproc

import (
	"errors"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
)

func TestRoundTripKeepsEveryField(t *testing.T) {
	rig, fw := Pair()
	defer rig.Close()
	var out protocol.Message
	out.Type = protocol.TypeState
	out.Seq = 42
	out.State.TimeUS = 1234
	out.State.Joints = 2
	out.State.Angle[1] = -0.25
	out.State.Contacts = protocol.ContactLeft
	if err := rig.Send(&out); err != nil {
		t.Fatal(err)
	}
	var in protocol.Message
	if err := fw.Recv(time.Now().Add(time.Second), &in); err != nil {
		t.Fatal(err)
	}
	if in != out {
		t.Fatalf("received %+v, sent %+v", in, out)
	}
	if s := rig.Stats(); s.FramesSent != 1 {
		t.Errorf("rig FramesSent = %d, want 1", s.FramesSent)
	}
	if s := fw.Stats(); s.FramesReceived != 1 {
		t.Errorf("firmware FramesReceived = %d, want 1", s.FramesReceived)
	}
}

func TestRecvErrors(t *testing.T) {
	tests := []struct {
		name    string
		prepare func(rig, fw *End)
		wait    time.Duration
		want    error
	}{
		{"deadline passes with nothing sent", func(rig, fw *End) {}, 5 * time.Millisecond, bridges.ErrTimeout},
		{"deadline already past", func(rig, fw *End) {}, -time.Millisecond, bridges.ErrTimeout},
		{"own end closed", func(rig, fw *End) { fw.Close() }, time.Second, bridges.ErrClosed},
		{"peer closed", func(rig, fw *End) { rig.Close() }, time.Second, bridges.ErrClosed},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			rig, fw := Pair()
			defer rig.Close()
			tc.prepare(rig, fw)
			var m protocol.Message
			err := fw.Recv(time.Now().Add(tc.wait), &m)
			if !errors.Is(err, tc.want) {
				t.Fatalf("Recv = %v, want %v", err, tc.want)
			}
		})
	}
}

func TestCloseWakesBlockedRecv(t *testing.T) {
	rig, fw := Pair()
	done := make(chan error, 1)
	go func() {
		var m protocol.Message
		done <- fw.Recv(time.Time{}, &m) // no deadline: only Close can end it
	}()
	time.Sleep(2 * time.Millisecond)
	rig.Close()
	select {
	case err := <-done:
		if !errors.Is(err, bridges.ErrClosed) {
			t.Fatalf("Recv = %v, want ErrClosed", err)
		}
	case <-time.After(2 * time.Second):
		t.Fatal("Recv still blocked 2 s after Close")
	}
	var m protocol.Message
	if err := rig.Send(&m); !errors.Is(err, bridges.ErrClosed) {
		t.Fatalf("Send after Close = %v, want ErrClosed", err)
	}
}

func TestBufferedMessagesSurviveClose(t *testing.T) {
	rig, fw := Pair()
	m := protocol.Message{Type: protocol.TypeStop, Stop: protocol.Stop{Reason: protocol.StopEnd}}
	rig.Send(&m)
	rig.Close()
	var got protocol.Message
	if err := fw.Recv(time.Now().Add(time.Second), &got); err != nil {
		t.Fatalf("a stop sent just before Close was lost: %v", err)
	}
	if got.Type != protocol.TypeStop {
		t.Fatalf("got type %#x, want stop", got.Type)
	}
	if err := fw.Recv(time.Now().Add(time.Second), &got); !errors.Is(err, bridges.ErrClosed) {
		t.Fatalf("second Recv = %v, want ErrClosed", err)
	}
}

func TestFullBufferDropsOldestAndCounts(t *testing.T) {
	rig, fw := PairSize(3)
	defer rig.Close()
	var m protocol.Message
	for i := 0; i < 5; i++ {
		m.Seq = uint32(i)
		if err := fw.Send(&m); err != nil {
			t.Fatal(err)
		}
	}
	if d := rig.Stats().Dropped; d != 2 {
		t.Fatalf("rig Stats().Dropped = %d, want 2", d)
	}
	for want := uint32(2); want < 5; want++ {
		if err := rig.Recv(time.Now().Add(time.Second), &m); err != nil {
			t.Fatal(err)
		}
		if m.Seq != want {
			t.Fatalf("got seq %d, want %d (oldest dropped, newest kept)", m.Seq, want)
		}
	}
}

func TestNoAllocations(t *testing.T) {
	rig, fw := Pair()
	defer rig.Close()
	var out, in protocol.Message
	out.Type = protocol.TypeCommand
	allocs := testing.AllocsPerRun(1000, func() {
		out.Seq++
		fw.Send(&out)
		rig.Recv(time.Now().Add(time.Second), &in)
		// A timed-out Recv must not allocate either once the timer exists.
		rig.Recv(time.Now().Add(time.Microsecond), &in)
	})
	if allocs != 0 {
		t.Fatalf("%.1f allocations per send/recv, want 0", allocs)
	}
}

func BenchmarkRoundTrip(b *testing.B) {
	rig, fw := Pair()
	defer rig.Close()
	go func() {
		var m protocol.Message
		for fw.Recv(time.Time{}, &m) == nil {
			m.Type = protocol.TypeCommand
			fw.Send(&m)
		}
	}()
	var out, in protocol.Message
	out.Type = protocol.TypeState
	b.ReportAllocs()
	for b.Loop() {
		out.Seq++
		rig.Send(&out)
		if err := rig.Recv(time.Now().Add(time.Second), &in); err != nil {
			b.Fatal(err)
		}
	}
}
