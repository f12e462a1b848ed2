package mqtt

import (
	"errors"
	"sort"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/broker"
	"gaitrig/bridges/protocol"
)

// echoFirmware answers every state on f with a command of the same seq
// until f is closed.
func echoFirmware(f *Conn) <-chan struct{} {
	done := make(chan struct{})
	go func() {
		defer close(done)
		var in protocol.Message
		out := command(0)
		for {
			err := f.Recv(time.Now().Add(time.Second), &in)
			if errors.Is(err, bridges.ErrClosed) {
				return
			}
			if err != nil || in.Type != protocol.TypeState {
				continue
			}
			out.Seq = in.Seq
			_ = f.Send(&out)
		}
	}()
	return done
}

// benchRoundTrip measures state out, command back through the broker at
// url, back to back. Allocations include both paho clients (and the broker,
// when it runs in this process).
func benchRoundTrip(b *testing.B, url string) { benchPaced(b, url, 0) }

// benchPaced is benchRoundTrip with one state per period (0: back to
// back). With a period it also reports the share of round trips longer than
// the period ("miss-%"): at that rate those commands would be late.
func benchPaced(b *testing.B, url string, period time.Duration) {
	r, f := pair(b, url, "bench")
	done := echoFirmware(f)
	defer func() { _ = f.Close(); <-done }()

	lat := make([]time.Duration, b.N)
	st := state(0)
	var in protocol.Message
	b.ReportAllocs()
	b.ResetTimer()
	next := time.Now()
	for i := 0; i < b.N; i++ {
		if period > 0 {
			next = next.Add(period)
			time.Sleep(time.Until(next))
		}
		st.Seq = uint32(i + 1)
		t0 := time.Now()
		if err := r.Send(&st); err != nil {
			b.Fatalf("Send: %v", err)
		}
		for {
			if err := r.Recv(t0.Add(wait), &in); err != nil {
				b.Fatalf("Recv of command %d: %v", st.Seq, err)
			}
			if in.Seq == st.Seq {
				break
			}
		}
		lat[i] = time.Since(t0)
	}
	b.StopTimer()
	sort.Slice(lat, func(i, j int) bool { return lat[i] < lat[j] })
	us := func(q float64) float64 { return float64(lat[int(q*float64(len(lat)-1))].Nanoseconds()) / 1e3 }
	b.ReportMetric(us(0.50), "p50-µs")
	b.ReportMetric(us(0.99), "p99-µs")
	b.ReportMetric(us(1), "max-µs")
	if period > 0 {
		late := len(lat) - sort.Search(len(lat), func(i int) bool { return lat[i] > period })
		b.ReportMetric(100*float64(late)/float64(len(lat)), "miss-%")
	}
}

// BenchmarkRoundTripEmbedded1kHz sends one state per millisecond, as a
// wall-clock run at 1 kHz does; -benchtime=10000x is ten seconds of ticks.
func BenchmarkRoundTripEmbedded1kHz(b *testing.B) {
	br := embedded(b, broker.Config{})
	benchPaced(b, "tcp://"+br.Addr(), time.Millisecond)
}

func BenchmarkRoundTripEmbedded(b *testing.B) {
	br := embedded(b, broker.Config{})
	benchRoundTrip(b, "tcp://"+br.Addr())
}

// BenchmarkRoundTripMosquitto runs Mosquitto with set_tcp_nodelay (off by
// default in Mosquitto 2.0) and without it ("nagle"), where Nagle's
// algorithm holds back some small writes and the slowest round trips take
// about 40 ms.
func BenchmarkRoundTripMosquitto(b *testing.B) {
	for _, bc := range []struct{ name, conf string }{
		{"nodelay", "set_tcp_nodelay true\n"},
		{"nagle", ""},
	} {
		b.Run(bc.name, func(b *testing.B) {
			m := startMosquitto(b, bc.conf)
			benchRoundTrip(b, m.url("tcp"))
		})
	}
}

// offlineConn is a Conn with no broker behind it, for measuring this
// package's own receive path (queue, echo filter, decode) apart from paho.
func offlineConn(role Role) *Conn {
	c := &Conn{
		cfg:       Config{Role: role, Rig: "b1"},
		inTopic:   "gaitrig/b1/command",
		stopTopic: "gaitrig/b1/stop",
		rx:        make(chan inbound, 4),
		closed:    make(chan struct{}),
		timer:     time.NewTimer(time.Hour),
	}
	c.timer.Stop()
	return c
}

func encoded(tb testing.TB, m protocol.Message) []byte {
	tb.Helper()
	buf := make([]byte, protocol.MaxFrameLen)
	n, err := protocol.Encode(buf, &m)
	if err != nil {
		tb.Fatal(err)
	}
	return buf[:n]
}

// TestRecvPathDoesNotAllocate checks that this package adds no allocation
// per received message, with and without a deadline and for a stop frame
// that passes the echo filter (paho's own allocations are not part of it).
func TestRecvPathDoesNotAllocate(t *testing.T) {
	c := offlineConn(RoleRig)
	cases := []struct {
		name     string
		in       inbound
		deadline func() time.Time
	}{
		{"command, deadline", inbound{payload: encoded(t, command(3))}, func() time.Time { return time.Now().Add(time.Second) }},
		{"command, no deadline", inbound{payload: encoded(t, command(4))}, func() time.Time { return time.Time{} }},
		{"stop from the peer", inbound{payload: encoded(t, stop(4, protocol.StopFirmware, "done")), stop: true}, func() time.Time { return time.Now().Add(time.Second) }},
	}
	var m protocol.Message
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			allocs := testing.AllocsPerRun(1000, func() {
				c.rx <- tc.in
				if err := c.Recv(tc.deadline(), &m); err != nil {
					t.Fatal(err)
				}
			})
			if allocs != 0 {
				t.Fatalf("%v allocations per received message, want 0", allocs)
			}
		})
	}
}

// BenchmarkRecvPath is this package's receive path alone: queue, deadline
// timer, decode, direction check.
func BenchmarkRecvPath(b *testing.B) {
	c := offlineConn(RoleRig)
	in := inbound{payload: encoded(b, command(3))}
	var m protocol.Message
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		c.rx <- in
		if err := c.Recv(time.Now().Add(time.Second), &m); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkRoundTripMosquitto1kHz is the 1 kHz paced round trip through
// Mosquitto with set_tcp_nodelay.
func BenchmarkRoundTripMosquitto1kHz(b *testing.B) {
	m := startMosquitto(b, "set_tcp_nodelay true\n")
	benchPaced(b, m.url("tcp"), time.Millisecond)
}
