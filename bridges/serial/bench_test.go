package serial

import (
	"slices"
	"testing"
	"time"

	"gaitrig/bridges/protocol"
)

// echoFirmware answers every state with a command echoing its seq, as a
// board would, until the link closes.
func echoFirmware(fw *Conn) {
	var in protocol.Message
	out := protocol.Message{Type: protocol.TypeCommand, Command: protocol.Command{Joints: 2, Torque: [protocol.MaxJoints]float32{1.5, -2}}}
	for {
		if err := fw.Recv(time.Time{}, &in); err != nil {
			if fw.isClosed() {
				return
			}
			continue
		}
		if in.Type != protocol.TypeState {
			continue
		}
		out.Seq = in.Seq
		if fw.Send(&out) != nil {
			return
		}
	}
}

func benchRoundTrip(b *testing.B, period time.Duration) {
	p, err := NewPty()
	if err != nil {
		b.Fatal(err)
	}
	rig, err := Open(Config{Port: p.Path})
	if err != nil {
		b.Fatal(err)
	}
	p.ReleaseFollower()
	fw := NewConn(p.Master, "pty master", Config{})
	go echoFirmware(fw)
	defer func() { rig.Close(); fw.Close() }()

	st := protocol.Message{Type: protocol.TypeState, State: protocol.State{Joints: 2,
		Angle: [protocol.MaxJoints]float32{0.2, -0.1}, Rate: [protocol.MaxJoints]float32{1, -1}, IMUPitch: -0.05}}
	var cmd protocol.Message
	roundTrip := func(seq uint32) time.Duration {
		st.Seq = seq
		st.State.TimeUS = uint64(seq) * 1000
		t0 := time.Now()
		if err := rig.Send(&st); err != nil {
			b.Fatal(err)
		}
		for {
			if err := rig.Recv(t0.Add(time.Second), &cmd); err != nil {
				b.Fatal(err)
			}
			if cmd.Type == protocol.TypeCommand && cmd.Seq == seq {
				return time.Since(t0)
			}
		}
	}
	for i := range 200 { // warm up the goroutines and the pty
		roundTrip(uint32(i + 1))
	}
	lat := make([]time.Duration, b.N)
	b.ReportAllocs()
	b.ResetTimer()
	next := time.Now()
	for i := 0; i < b.N; i++ {
		if period > 0 {
			next = next.Add(period)
			time.Sleep(time.Until(next))
		}
		lat[i] = roundTrip(uint32(1000 + i))
	}
	b.StopTimer()
	slices.Sort(lat)
	us := func(q float64) float64 { return float64(lat[int(q*float64(len(lat)-1))]) / 1e3 }
	b.ReportMetric(us(0.5), "p50-µs")
	b.ReportMetric(us(0.99), "p99-µs")
	b.ReportMetric(float64(lat[len(lat)-1])/1e3, "max-µs")
}

// BenchmarkPtyRoundTrip sends one state (a 1 kHz tick's frame) through a real
// pty to an echoing firmware and waits for its command, back to back.
func BenchmarkPtyRoundTrip(b *testing.B) { benchRoundTrip(b, 0) }

// BenchmarkPtyRoundTrip1kHz does the same paced at one state per
// millisecond, as a wall-clock run would (ns/op then includes the pacing).
func BenchmarkPtyRoundTrip1kHz(b *testing.B) { benchRoundTrip(b, time.Millisecond) }
