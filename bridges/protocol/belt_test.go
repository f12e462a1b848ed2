package protocol

import (
	"math"
	"slices"
	"strings"
	"testing"
)

// TestBeltPositionRoundTrip: the belt place travels in the state's bytes
// 10–11 (frame offset 18), little-endian two's complement, and decodes to
// the same value; a state without ContactBelt says it has none.
func TestBeltPositionRoundTrip(t *testing.T) {
	for _, mm := range []int16{0, 1, -1, 1234, -1234, math.MaxInt16, -math.MaxInt16} {
		in := Message{Type: TypeState, Seq: 7, State: State{Joints: 2, Contacts: ContactLeft | ContactBelt, BeltMM: mm}}
		var buf [MaxFrameLen]byte
		n, err := Encode(buf[:], &in)
		if err != nil {
			t.Fatal(err)
		}
		if n != FrameLen(Version, TypeState) {
			t.Fatalf("state frame is %d bytes, want the unchanged %d", n, FrameLen(Version, TypeState))
		}
		// Independent of the decoder: the bytes at frame offset 18.
		if got := int16(uint16(buf[18]) | uint16(buf[19])<<8); got != mm {
			t.Errorf("frame bytes 18-19 hold %d, want %d", got, mm)
		}
		var out Message
		if err := Decode(buf[:n], &out); err != nil {
			t.Fatal(err)
		}
		pos, ok := out.State.BeltPosition()
		if !ok || out.State.BeltMM != mm || pos != float64(mm)/1000 {
			t.Errorf("decoded %d mm (%v m, ok %v), want %d", out.State.BeltMM, pos, ok, mm)
		}
	}
	var s State
	s.Contacts = ContactLeft | ContactRight
	if _, ok := s.BeltPosition(); ok {
		t.Error("a state without ContactBelt reports a belt position")
	}
}

// TestBeltPositionOldRig: a state from a rig that predates the field (bytes
// 10–11 zero, bit 2 clear) decodes with no belt position, and a version-1
// frame carries the field exactly as version 2 (the state is the same in
// both).
func TestBeltPositionOldRig(t *testing.T) {
	for _, v := range []uint8{1, 2} {
		in := Message{Version: v, Type: TypeState, State: State{Joints: 1, Contacts: ContactBelt, BeltMM: -250}}
		var buf [MaxFrameLen]byte
		n, err := Encode(buf[:], &in)
		if err != nil {
			t.Fatal(err)
		}
		var out Message
		if err := Decode(buf[:n], &out); err != nil {
			t.Fatal(err)
		}
		if p, ok := out.State.BeltPosition(); !ok || p != -0.25 {
			t.Errorf("version %d: belt position %v %v, want -0.25 true", v, p, ok)
		}
		buf[18], buf[19], buf[17] = 0, 0, 0 // as an older rig sends it: contacts (frame offset 17) 0
		crc := CRC16(buf[:n-CRCLen])
		buf[n-2], buf[n-1] = byte(crc), byte(crc>>8)
		if err := Decode(buf[:n], &out); err != nil {
			t.Fatal(err)
		}
		if _, ok := out.State.BeltPosition(); ok || out.State.BeltMM != 0 {
			t.Errorf("version %d: an old rig's state reports a belt (%d mm)", v, out.State.BeltMM)
		}
	}
}

func TestBeltMMOf(t *testing.T) {
	for _, c := range []struct {
		m    float64
		want int16
	}{{0, 0}, {0.0004, 0}, {0.0006, 1}, {-0.0006, -1}, {1.2345, 1235}, {-1.5, -1500}, {40, 32767}, {-40, -32767}, {math.Inf(1), 32767}, {math.NaN(), 0}} {
		if got := BeltMMOf(c.m); got != c.want {
			t.Errorf("BeltMMOf(%v) = %d, want %d", c.m, got, c.want)
		}
	}
}

func TestBeltPositionJSON(t *testing.T) {
	in := Message{Version: 2, Type: TypeState, Seq: 3, State: State{Joints: 1, Contacts: ContactRight | ContactBelt, BeltMM: -417}}
	js, err := AppendJSON(nil, &in)
	if err != nil {
		t.Fatal(err)
	}
	var out Message
	if err := ParseJSON(js, &out); err != nil {
		t.Fatalf("%s: %v", js, err)
	}
	if out.State.BeltMM != -417 || out.State.Contacts != in.State.Contacts {
		t.Errorf("%s parsed to %+v", js, out.State)
	}
	plain := Message{Version: 2, Type: TypeState, State: State{Joints: 1}}
	js, _ = AppendJSON(nil, &plain)
	if want := `"belt_mm"`; strings.Contains(string(js), want) {
		t.Errorf("a state off the belt writes %s: %s", want, js)
	}
}

// TestBeltExample: the belt example of docs/protocol.md section 3.3.1, the
// section-11 state with the belt place −417 mm, differs from that state in
// frame bytes 17–19 and the CRC, with the values the document gives.
func TestBeltExample(t *testing.T) {
	var plain Message
	for _, e := range exampleMessages() {
		if e.name == "state" {
			plain = e.msg
		}
	}
	belt := plain
	belt.State.Contacts |= ContactBelt
	belt.State.BeltMM = -417
	var a, b [MaxFrameLen]byte
	n, err := Encode(a[:], &plain)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := Encode(b[:], &belt); err != nil {
		t.Fatal(err)
	}
	var diff []int
	for i := 0; i < n; i++ {
		if a[i] != b[i] {
			diff = append(diff, i)
		}
	}
	want := []int{17, 18, 19, n - 2, n - 1}
	if !slices.Equal(diff, want) {
		t.Errorf("the belt state differs at frame offsets %v, want %v", diff, want)
	}
	if b[17] != 0x05 || b[18] != 0x5f || b[19] != 0xfe || b[n-2] != 0x13 || b[n-1] != 0xa1 {
		t.Errorf("bytes 17-19 % x, CRC bytes % x; the document says 05 5f fe and 13 a1", b[17:20], b[n-2:n])
	}
}
