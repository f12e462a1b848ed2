package hil

import (
	"errors"
	"fmt"
	"math/rand/v2"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/inproc"
	"gaitrig/bridges/protocol"
	"gaitrig/record"
)

// faultPair wraps the rig end of an in-process pair in a fault link with
// the given faults and one seeded stream for both directions, as lockstep
// does.
func faultPair(t *testing.T, faults ...LinkFault) (*faultLink, *inproc.End) {
	t.Helper()
	rig, fw := inproc.Pair()
	t.Cleanup(func() { rig.Close(); fw.Close() })
	rng := rand.New(rand.NewPCG(1, 2))
	return newFaultLink(rig, faults, rng, rng), fw
}

// sendCommand sends a command with seq from the firmware end.
func sendCommand(t *testing.T, fw bridges.Conn, seq uint32) {
	t.Helper()
	m := protocol.Message{Type: protocol.TypeCommand, Seq: seq}
	m.Command.Joints = 2
	if err := fw.Send(&m); err != nil {
		t.Fatal(err)
	}
}

// recvSoon is Recv with a short deadline: the messages are already in the
// in-process buffer, so a timeout means the fault link kept them back.
func recvSoon(f *faultLink, m *protocol.Message) error {
	return f.Recv(time.Now().Add(20*time.Millisecond), m)
}

// In lockstep only the command echoing the awaited sequence number meets
// the faults: a stale reply draws nothing, so how many stale replies a
// busy host produces cannot shift the random stream. Before the ticks
// start (awaitNone) nothing is exposed; in wall-clock (awaitAny) every
// command is.
func TestFaultLinkExposesOnlyAwaitedCommands(t *testing.T) {
	always := LinkFault{Kind: FaultDrop, Rate: 1}
	tests := []struct {
		name     string
		await    int64
		sent     []uint32
		received []uint32 // what comes out of Recv, in order
	}{
		{"handshake: none exposed", awaitNone, []uint32{3, 4}, []uint32{3, 4}},
		{"lockstep: only the awaited", 5, []uint32{4, 5, 6}, []uint32{4, 6}},
		{"wall-clock: all", awaitAny, []uint32{4, 5, 6}, nil},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			f, fw := faultPair(t, always)
			f.await(tc.await)
			for _, s := range tc.sent {
				sendCommand(t, fw, s)
			}
			var got []uint32
			var m protocol.Message
			for {
				err := recvSoon(f, &m)
				if errors.Is(err, bridges.ErrTimeout) {
					break
				}
				if err != nil {
					t.Fatal(err)
				}
				got = append(got, m.Seq)
			}
			if fmt.Sprint(got) != fmt.Sprint(tc.received) {
				t.Fatalf("received %v, want %v", got, tc.received)
			}
			if d := int(f.droppedCommands.Load()); d != len(tc.sent)-len(tc.received) {
				t.Fatalf("dropped %d, want %d", d, len(tc.sent)-len(tc.received))
			}
		})
	}
}

// A drop fault loses states on the way out and nothing else the rig
// sends; the lost ones never reach the transport.
func TestFaultLinkDropsOnlyStates(t *testing.T) {
	f, fw := faultPair(t, LinkFault{Kind: FaultDrop, Rate: 1})
	for _, typ := range []protocol.Type{protocol.TypeConfig, protocol.TypeState, protocol.TypeStop} {
		if err := f.Send(&protocol.Message{Type: typ}); err != nil {
			t.Fatal(err)
		}
	}
	var m protocol.Message
	var got []protocol.Type
	for fw.Recv(time.Now().Add(20*time.Millisecond), &m) == nil {
		got = append(got, m.Type)
	}
	if fmt.Sprint(got) != fmt.Sprint([]protocol.Type{protocol.TypeConfig, protocol.TypeStop}) {
		t.Fatalf("firmware received %v, want the config and the stop only", got)
	}
	if f.droppedStates.Load() != 1 || f.statesSent.Load() != 0 || f.Stats().FramesSent != 2 {
		t.Fatalf("dropped %d states, sent %d, transport sent %d frames", f.droppedStates.Load(), f.statesSent.Load(), f.Stats().FramesSent)
	}
}

// A corrupted command is a frame error, as a real link's CRC check reports
// it, and the faults act only inside their window of simulated time.
func TestFaultLinkCorruptionWindowAndLatency(t *testing.T) {
	f, fw := faultPair(t,
		LinkFault{Kind: FaultCorrupt, Rate: 1, From: 1, Until: 2},
		LinkFault{Kind: FaultLatency, Fixed: 3 * time.Millisecond, From: 2})
	f.await(awaitAny)
	var m protocol.Message
	var fe *bridges.FrameError
	for _, tc := range []struct {
		t       float64
		corrupt bool
		delay   time.Duration
	}{{0.5, false, 0}, {1, true, 0}, {1.999, true, 0}, {2, false, 3 * time.Millisecond}, {9, false, 3 * time.Millisecond}} {
		f.at(tc.t)
		sendCommand(t, fw, 1)
		err := recvSoon(f, &m)
		if tc.corrupt {
			if classify(err, &fe) != linkFrame || fe.Reason != injectedCorruption {
				t.Fatalf("t = %g: %v, want an injected corruption", tc.t, err)
			}
			continue
		}
		if err != nil || f.delay != tc.delay {
			t.Fatalf("t = %g: %v, delay %v; want the command with delay %v", tc.t, err, f.delay, tc.delay)
		}
	}
	if f.corrupted.Load() != 2 {
		t.Fatalf("corrupted %d, want 2", f.corrupted.Load())
	}
}

// Faults cost no allocation per message: the corruption error is kept in
// the link and the draws come from a stream made once.
func TestFaultLinkDoesNotAllocate(t *testing.T) {
	f, fw := faultPair(t,
		LinkFault{Kind: FaultDrop, Rate: 0.3},
		LinkFault{Kind: FaultCorrupt, Rate: 0.3},
		LinkFault{Kind: FaultLatency, Fixed: time.Millisecond, Jitter: time.Millisecond})
	f.await(awaitAny)
	state := protocol.Message{Type: protocol.TypeState}
	cmd := protocol.Message{Type: protocol.TypeCommand, Seq: 1}
	var m protocol.Message
	var fe *bridges.FrameError
	allocs := testing.AllocsPerRun(1000, func() {
		f.Send(&state)
		fw.Send(&cmd)
		classify(f.Recv(time.Now(), &m), &fe)
	})
	if allocs != 0 {
		t.Fatalf("%g allocations per exchange through the fault link, want 0", allocs)
	}
	if f.droppedStates.Load() == 0 || f.droppedCommands.Load() == 0 || f.corrupted.Load() == 0 {
		t.Fatalf("the faults did not fire: %d states and %d commands dropped, %d corrupted",
			f.droppedStates.Load(), f.droppedCommands.Load(), f.corrupted.Load())
	}
}

// Both clocks get the corrupt fault from the fault link: every corrupted
// command is a bad frame. Lockstep raises one bad_frame per frame;
// wall-clock at most one per tick, with the exact count in the result.
func TestCorruptFaultOnBothClocks(t *testing.T) {
	for _, clock := range []ClockMode{Lockstep, Wallclock} {
		t.Run(string(clock), func(t *testing.T) {
			cfg, run := shortRun(t, 200)
			cfg.Clock = clock
			cfg.Resend = time.Millisecond
			cfg.Severity = map[string]Severity{AlarmBadFrame: SeverityWarn}
			cfg.LinkFaults = []LinkFault{{Kind: FaultCorrupt, Rate: 0.2}}
			res, _, _ := run(cfg, scripted(seqTorque))
			l := res.Link
			if l.Corrupted == 0 || l.BadFrames != l.Corrupted {
				t.Fatalf("counts %+v: want corruptions, all counted as bad frames", l)
			}
			alarms := uint64(res.Summary.Alarms[AlarmBadFrame])
			if alarms == 0 || alarms > l.BadFrames || (clock == Lockstep && alarms != l.BadFrames) {
				t.Fatalf("%d bad_frame alarms for %d bad frames", alarms, l.BadFrames)
			}
		})
	}
}

// The result carries the transport's own counts: over the in-process link
// every frame the rig sent is the configuration, the stop, or a state that
// no drop fault lost.
func TestResultCarriesTransportStats(t *testing.T) {
	cfg, run := shortRun(t, 300)
	cfg.Resend = time.Millisecond
	cfg.LinkFaults = []LinkFault{{Kind: FaultDrop, Rate: 0.1}}
	res, _, _ := run(cfg, scripted(seqTorque))
	l, tr := res.Link, res.Transport
	if l.DroppedStates == 0 {
		t.Fatalf("no state was dropped (%+v)", l)
	}
	if tr.FramesSent != l.StatesSent+2 {
		t.Fatalf("transport sent %d frames, the loop %d states (+ config and stop); %+v", tr.FramesSent, l.StatesSent, l)
	}
	if tr.FramesReceived < l.Commands+1 {
		t.Fatalf("transport received %d frames, the loop took %d commands after the greeting", tr.FramesReceived, l.Commands)
	}
}

// The run's end is decided once: the first end set wins, whatever comes
// after it.
func TestEndingFirstWins(t *testing.T) {
	var e ending
	if e.set() {
		t.Fatal("a new run has an outcome")
	}
	if !e.end(record.Tripped, "watchdog: silent", protocol.StopWatchdog) {
		t.Fatal("the first end did not take")
	}
	if e.end(record.Aborted, "the link to the firmware closed", protocol.StopEStop) {
		t.Fatal("a second end took")
	}
	if e.outcome != record.Tripped || e.reason != "watchdog: silent" || e.stopCode != protocol.StopWatchdog {
		t.Fatalf("ending %+v, want the first", e)
	}
}

// classify sorts every error a link returns into the classes the loop
// acts on, in one place for both clocks and the handshake.
func TestClassifyLinkErrors(t *testing.T) {
	fe := &bridges.FrameError{Reason: "bad CRC", Err: &protocol.Error{Kind: protocol.KindVersion}}
	tests := []struct {
		name string
		err  error
		want linkErr
	}{
		{"nil", nil, linkOK},
		{"timeout", bridges.ErrTimeout, linkTimeout},
		{"still down at the deadline", fmt.Errorf("serial: %w (%w)", bridges.ErrTimeout, bridges.ErrDisconnected), linkTimeout},
		{"disconnected", fmt.Errorf("serial: port gone: %w", bridges.ErrDisconnected), linkDisconnected},
		{"closed", bridges.ErrClosed, linkClosed},
		{"frame", fe, linkFrame},
		{"wrapped frame", fmt.Errorf("mqtt: %w", fe), linkFrame},
		{"other", errors.New("read /dev/ttyUSB0: input/output error"), linkOther},
	}
	for _, tc := range tests {
		var got *bridges.FrameError
		if k := classify(tc.err, &got); k != tc.want {
			t.Errorf("%s: class %d, want %d", tc.name, k, tc.want)
		} else if k == linkFrame && got != fe {
			t.Errorf("%s: frame error %v not handed back", tc.name, got)
		}
	}
}
