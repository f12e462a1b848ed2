package broker

import (
	"errors"
	"io"
	"log/slog"
	"net"
	"os"
	"runtime"
	"strings"
	"testing"
	"time"

	"github.com/eclipse/paho.mqtt.golang/packets"
)

// refusalChan returns an OnRefusal that hands refusals to a channel (never
// blocking the broker) and a function that waits, bounded, for the next.
func refusalChan(t *testing.T) (func(Refusal), func() Refusal) {
	ch := make(chan Refusal, 64)
	return func(r Refusal) {
			select {
			case ch <- r:
			default:
			}
		}, func() Refusal {
			t.Helper()
			select {
			case r := <-ch:
				return r
			case <-time.After(wait):
				t.Fatal("no refusal reported")
			}
			return Refusal{}
		}
}

// remainingLength encodes n as an MQTT variable-length integer.
func remainingLength(n int) []byte {
	var b []byte
	for {
		d := byte(n % 128)
		n /= 128
		if n > 0 {
			d |= 0x80
		}
		b = append(b, d)
		if n == 0 {
			return b
		}
	}
}

func heapAfterGC() uint64 {
	runtime.GC()
	var m runtime.MemStats
	runtime.ReadMemStats(&m)
	return m.HeapAlloc
}

// TestHugeConnectDoesNotGrowTheBroker: an unauthenticated client announces
// a 200 MB CONNECT and streams bytes. The broker must close the connection
// on reading the announced size, without holding the packet. Before the
// limit it allocated the whole announced length at once (heap +200 MB).
func TestHugeConnectDoesNotGrowTheBroker(t *testing.T) {
	notify, next := refusalChan(t)
	b := startBroker(t, Config{OnRefusal: notify})
	const announced = 200 << 20
	before := heapAfterGC()

	c, err := net.Dial("tcp", b.Addr())
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	// A safety bound so a broker that keeps reading cannot hang the test;
	// the assertion below is on how the writes end, not on their speed.
	_ = c.SetDeadline(time.Now().Add(4 * wait))
	if _, err := c.Write(append([]byte{0x10}, remainingLength(announced)...)); err != nil {
		t.Fatal(err)
	}
	chunk := make([]byte, 64<<10)
	sent, werr := 0, error(nil)
	for sent < announced && werr == nil {
		var n int
		n, werr = c.Write(chunk)
		sent += n
	}
	grown := int64(heapAfterGC()) - int64(before)
	t.Logf("streamed %d bytes before the write failed (%v); heap grew by %d bytes", sent, werr, grown)
	if grown > 8<<20 {
		t.Errorf("broker heap grew by %d MB while a 200 MB CONNECT was streamed, want under 8 MB", grown>>20)
	}
	if werr == nil {
		t.Fatalf("all %d bytes were accepted: the broker read the oversized CONNECT", sent)
	}
	if errors.Is(werr, os.ErrDeadlineExceeded) {
		t.Fatalf("the broker neither read nor closed the connection: %v", werr)
	}
	r := next()
	if r.Kind != RefusedOversized || r.Remote != c.LocalAddr().String() || !strings.Contains(r.Reason, "4096-byte limit") {
		t.Errorf("refusal %+v, want an oversized packet from %s", r, c.LocalAddr())
	}
}

func TestOversizedPublishClosesTheConnection(t *testing.T) {
	notify, next := refusalChan(t)
	b := startBroker(t, Config{OnRefusal: notify, Limits: Limits{MaxPacketBytes: 1024}})
	c := mustDial(t, b, clientOpts{id: "firmware.b1"})
	if tok := c.Publish("gaitrig/b1/command", 0, false, make([]byte, 512)); !tok.WaitTimeout(wait) || tok.Error() != nil {
		t.Fatalf("a 512-byte frame: %v", tok.Error())
	}
	c.Publish("gaitrig/b1/command", 0, false, make([]byte, 2048))
	r := next()
	if r.Kind != RefusedOversized || r.ClientID != "firmware.b1" || !strings.Contains(r.Reason, "1024-byte limit") {
		t.Errorf("refusal %+v, want an oversized packet from firmware.b1", r)
	}
}

func TestMaxClients(t *testing.T) {
	notify, next := refusalChan(t)
	b := startBroker(t, Config{OnRefusal: notify, Limits: Limits{MaxClients: 2}})
	mustDial(t, b, clientOpts{id: "monitor.a"})
	mustDial(t, b, clientOpts{id: "monitor.b"})
	_, err := dial(t, b, clientOpts{id: "monitor.c"})
	if !errors.Is(err, packets.ErrorRefusedServerUnavailable) {
		t.Fatalf("third client: %v, want server unavailable", err)
	}
	if r := next(); r.Kind != RefusedBusy || !strings.Contains(r.Reason, "limit of 2 clients") {
		t.Errorf("refusal %+v", r)
	}
}

// closedByBroker reads from c until the broker closes it; a read that
// times out (the safety bound) means the broker kept it open.
func closedByBroker(t *testing.T, c net.Conn) {
	t.Helper()
	_ = c.SetReadDeadline(time.Now().Add(4 * wait))
	_, err := io.Copy(io.Discard, c)
	if errors.Is(err, os.ErrDeadlineExceeded) {
		t.Fatal("the broker kept the connection open")
	}
}

func TestConnectionsWaitingForConnectAreBounded(t *testing.T) {
	notify, next := refusalChan(t)
	b := startBroker(t, Config{OnRefusal: notify, Limits: Limits{MaxClients: 1, MaxPending: 1, ConnectWait: 200 * time.Millisecond}})
	var silent []net.Conn
	for i := 0; i < 3; i++ {
		c, err := net.Dial("tcp", b.Addr())
		if err != nil {
			t.Fatal(err)
		}
		defer c.Close()
		silent = append(silent, c)
	}
	// The third is over MaxClients+MaxPending and is closed at once; the
	// first two are closed when ConnectWait runs out. Which refusal comes
	// first depends on scheduling, so collect all three.
	for _, c := range silent {
		closedByBroker(t, c)
	}
	kinds := map[RefusalKind]int{}
	for i := 0; i < 3; i++ {
		r := next()
		kinds[r.Kind]++
		if r.Kind == RefusedMalformed && !strings.Contains(r.Reason, "no CONNECT within 200ms") {
			t.Errorf("reason %q", r.Reason)
		}
	}
	if kinds[RefusedBusy] != 1 || kinds[RefusedMalformed] != 2 {
		t.Errorf("refusals by kind %v, want 1 busy and 2 malformed (no CONNECT)", kinds)
	}
}

func TestFirstPacketMustBeConnect(t *testing.T) {
	notify, next := refusalChan(t)
	b := startBroker(t, Config{OnRefusal: notify})
	c, err := net.Dial("tcp", b.Addr())
	if err != nil {
		t.Fatal(err)
	}
	defer c.Close()
	if _, err := c.Write([]byte{0x30, 0x03, 0x00, 0x01, 'x'}); err != nil { // PUBLISH "x", empty payload
		t.Fatal(err)
	}
	closedByBroker(t, c)
	if r := next(); r.Kind != RefusedMalformed || !strings.Contains(r.Reason, "first packet must be connect") {
		t.Errorf("refusal %+v", r)
	}
}

// TestRefusalLogIsRateLimited: a flood of one kind logs the first few at
// once, then one per interval with the count of those not logged, while
// every refusal is counted and passed to the callback. The clock is fixed,
// so the test does not depend on how fast the machine is.
func TestRefusalLogIsRateLimited(t *testing.T) {
	var buf syncBuffer
	calls := 0
	l := newRefusalLog(slog.New(slog.NewTextHandler(&buf, nil)), func(Refusal) { calls++ })
	now := time.Date(2026, 1, 1, 0, 0, 0, 0, time.UTC)
	l.now = func() time.Time { return now }
	for i := 0; i < 100; i++ {
		l.report(Refusal{Kind: RefusedPublish, ClientID: "firmware.b1", Topic: "gaitrig/b2/command"})
	}
	l.report(Refusal{Kind: RefusedClientID, ClientID: "board1"}) // another kind has its own budget
	now = now.Add(logEvery)
	l.report(Refusal{Kind: RefusedPublish, ClientID: "firmware.b1"})
	l.summarize()

	out := buf.String()
	if n := strings.Count(out, "broker refused publish"); n != logBurst+1 {
		t.Errorf("%d publish lines logged, want %d (the burst, then one after an interval)\n%s", n, logBurst+1, out)
	}
	if !strings.Contains(out, "broker refused client_id") {
		t.Error("a refusal of another kind was held back by the publish flood")
	}
	if want := "not_logged_before=95"; !strings.Contains(out, want) {
		t.Errorf("log lacks %s\n%s", want, out)
	}
	if !strings.Contains(out, "broker refusals while it ran") || !strings.Contains(out, "publish=101") || !strings.Contains(out, "client_id=1") {
		t.Errorf("summary missing or wrong\n%s", out)
	}
	if got := l.snapshot(); got[RefusedPublish] != 101 || got[RefusedClientID] != 1 || len(got) != 2 {
		t.Errorf("snapshot %v", got)
	}
	if calls != 102 {
		t.Errorf("callback called %d times, want every refusal (102)", calls)
	}
}
