package hil

import (
	"context"
	"encoding/binary"
	"errors"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/bridges/serial"
	"gaitrig/record"
)

// TestOtherVersionGreetingOverSerial: over a real pty, a firmware of another
// protocol version sends its greeting. The frame does not decode (its
// version byte is not ours), so the rig sees a frame error; it must still
// recognise the version mismatch (docs/protocol.md section 8), trip with the
// version_mismatch alarm and answer with a stop(bad_version) that the
// firmware can read, instead of timing out the handshake.
func TestOtherVersionGreetingOverSerial(t *testing.T) {
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
	fw := serial.NewConn(p.Master, "pty master", serial.Config{})
	defer fw.Close()

	// A greeting as a firmware of the next version would frame it: header
	// and payload version byte Version+1, CRC recomputed, COBS and a zero
	// delimiter.
	g := protocol.Message{Type: protocol.TypeGreeting, Greeting: protocol.Greeting{Version: protocol.Version, Actuators: 2, Name: "fw-v2", Build: "t"}}
	var frame [protocol.MaxFrameLen]byte
	n, err := protocol.Encode(frame[:], &g)
	if err != nil {
		t.Fatal(err)
	}
	frame[0], frame[8] = protocol.Version+1, protocol.Version+1 // header version, greeting version
	binary.LittleEndian.PutUint16(frame[n-2:], protocol.CRC16(frame[:n-2]))
	wire := make([]byte, protocol.COBSMaxLen(n)+2)
	k, err := protocol.EncodeCOBS(wire[1:], frame[:n])
	if err != nil {
		t.Fatal(err)
	}
	wire = wire[:k+2] // leading and trailing zero delimiters
	if _, err := p.Master.Write(wire); err != nil {
		t.Fatal(err)
	}

	m, s, cfg := demo(t, 5)
	// A rig that ignored the greeting and waited for the handshake to
	// time out would return the no-greeting error below; the outcome, not
	// a clock, tells the two apart, so the timeout is only a generous
	// bound on a busy host.
	cfg.HandshakeTimeout = 20 * time.Second
	w := newRecord(t, cfg, m, s)
	res, err := Run(context.Background(), cfg, m, s, rig, w)
	if err != nil {
		t.Fatalf("Run: %v (the rig did not refuse the greeting)", err)
	}
	if res.Summary.Outcome != record.Tripped || res.Summary.Alarms[AlarmVersionMismatch] != 1 {
		t.Errorf("outcome %s (%s), alarms %v; want tripped with one version_mismatch", res.Summary.Outcome, res.Summary.Reason, res.Summary.Alarms)
	}
	var got protocol.Message
	for deadline := time.Now().Add(20 * time.Second); ; { // a bound on a hang: the stop was sent before Run returned
		err := fw.Recv(deadline, &got)
		if err == nil && got.Type == protocol.TypeStop {
			break
		}
		var fe *bridges.FrameError
		if err != nil && !errors.As(err, &fe) {
			t.Fatalf("the firmware side got no stop: %v", err)
		}
	}
	if got.Stop.Reason != protocol.StopBadVersion {
		t.Errorf("stop reason %d, want %d (bad_version)", got.Stop.Reason, protocol.StopBadVersion)
	}
	// The refusal names both sides and travels in the rig's newest version
	// (docs/protocol.md section 8: every version reads a stop).
	if got.Stop.Text != "rig speaks v1-v2, firmware v3" || got.Version != protocol.Version {
		t.Errorf("stop %q in version %d; want \"rig speaks v1-v2, firmware v3\" in version %d", got.Stop.Text, got.Version, protocol.Version)
	}
}
