package protocol

import (
	"strings"
	"testing"
)

// TestKneeUnlockRoundTrip: the knee unlock bits travel in the command's
// byte 1 (frame offset 9), which versions 1 and 2 reserved, in both
// versions, and decode to the same bits; the frame keeps its length.
func TestKneeUnlockRoundTrip(t *testing.T) {
	for _, v := range []uint8{1, 2} {
		for _, bits := range []uint8{0, UnlockKneeLeft, UnlockKneeRight, UnlockKneeLeft | UnlockKneeRight, 0x80} {
			in := Message{Version: v, Type: TypeCommand, Seq: 9, Command: Command{Joints: 4, KneeUnlock: bits, Status: StatusSafeMode}}
			in.Command.Torque[3] = -2.5
			var buf [MaxFrameLen]byte
			n, err := Encode(buf[:], &in)
			if err != nil {
				t.Fatal(err)
			}
			if n != FrameLen(v, TypeCommand) {
				t.Fatalf("command frame is %d bytes, want the unchanged %d", n, FrameLen(v, TypeCommand))
			}
			// Independent of the decoder: the byte at frame offset 9.
			if buf[HeaderLen+1] != bits {
				t.Errorf("version %d: frame byte 9 holds %#x, want %#x", v, buf[HeaderLen+1], bits)
			}
			var out Message
			if err := Decode(buf[:n], &out); err != nil {
				t.Fatal(err)
			}
			if out.Command != in.Command {
				t.Errorf("version %d: decoded %+v, want %+v", v, out.Command, in.Command)
			}
		}
	}
}

// TestKneeUnlockOldBoard: a command from a board that predates the field
// (byte 1 zero) decodes with no unlock, and a decoded command does not keep
// the bits of the one before.
func TestKneeUnlockOldBoard(t *testing.T) {
	var out Message
	for _, bits := range []uint8{UnlockKneeRight, 0} {
		in := Message{Type: TypeCommand, Command: Command{Joints: 2, KneeUnlock: bits}}
		var buf [MaxFrameLen]byte
		n, err := Encode(buf[:], &in)
		if err != nil {
			t.Fatal(err)
		}
		if err := Decode(buf[:n], &out); err != nil {
			t.Fatal(err)
		}
		if out.Command.KneeUnlock != bits {
			t.Errorf("decoded knee_unlock %#x, want %#x", out.Command.KneeUnlock, bits)
		}
	}
}

// TestKneeUnlockJSON: the JSON debug form carries the bits, and a command
// without them reads as before (no "knee_unlock" key).
func TestKneeUnlockJSON(t *testing.T) {
	in := Message{Version: 2, Type: TypeCommand, Seq: 3, Command: Command{Joints: 4, KneeUnlock: UnlockKneeLeft}}
	js, err := AppendJSON(nil, &in)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(js), `"knee_unlock":1`) {
		t.Errorf("JSON without the bits: %s", js)
	}
	var out Message
	if err := ParseJSON(js, &out); err != nil {
		t.Fatalf("%s: %v", js, err)
	}
	if out.Command != in.Command {
		t.Errorf("%s parsed to %+v", js, out.Command)
	}
	plain := Message{Version: 2, Type: TypeCommand, Command: Command{Joints: 2}}
	js, _ = AppendJSON(nil, &plain)
	if strings.Contains(string(js), "knee_unlock") {
		t.Errorf("a command without unlock writes the field: %s", js)
	}
}
