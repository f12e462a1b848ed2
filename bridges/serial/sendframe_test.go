package serial

import (
	"errors"
	"testing"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
)

// SendFrame puts a frame on the line exactly as given: a frame with a
// broken CRC arrives as a bad-CRC refusal, the same bytes with the CRC
// intact arrive as the message, and a frame longer than any protocol
// version allows is refused before anything is written.
func TestSendFrameAsGiven(t *testing.T) {
	p := newPair(t, Config{})
	m := messages()[2]
	var buf [protocol.MaxFrameLen]byte
	n, err := protocol.Encode(buf[:], &m)
	if err != nil {
		t.Fatal(err)
	}
	bad := append([]byte(nil), buf[:n]...)
	bad[n-1] ^= 0xFF
	if err := p.rig.SendFrame(bad); err != nil {
		t.Fatal(err)
	}
	if err := p.rig.SendFrame(buf[:n]); err != nil {
		t.Fatal(err)
	}
	var got protocol.Message
	err = p.fw.Recv(soon(), &got)
	var fe *bridges.FrameError
	if !errors.As(err, &fe) || !errors.Is(err, protocol.ErrBadCRC) {
		t.Fatalf("the damaged frame arrived as %v, want a bad-CRC refusal", err)
	}
	if got := recvMsg(t, p.fw); !same(got, m) {
		t.Fatalf("the intact frame arrived as %+v, want %+v", got, m)
	}
	if err := p.rig.SendFrame(make([]byte, protocol.MaxFrameLen+1)); err == nil {
		t.Error("a 513-byte frame was accepted")
	}
}
