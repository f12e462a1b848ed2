package protocol

import (
	"bytes"
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"
)

// exampleMessages are the messages of the examples in docs/protocol.md
// section 11: a bench scenario of our own (a two-joint walker at 1 kHz).
func exampleMessages() []struct {
	name string
	msg  Message
} {
	return []struct {
		name string
		msg  Message
	}{
		{"greeting", Message{Version: 2, Type: TypeGreeting, Seq: 0, Greeting: Greeting{Version: 2, Actuators: 2, Name: "bench-walker", Build: "fw-0.3.1"}}},
		{"config", Message{Version: 2, Type: TypeConfig, Seq: 0, Config: Config{TickHz: 1000, Lockstep: true, Joints: 2,
			JointNames: [MaxJoints]string{"hip_left", "hip_right"}, TorqueLimit: [MaxJoints]float32{40, 40}, WatchdogUS: 50000}}},
		{"state", Message{Version: 2, Type: TypeState, Seq: 1235, State: State{TimeUS: 1234000, Joints: 2,
			Angle: [MaxJoints]float32{0.25, -0.125}, Rate: [MaxJoints]float32{1.5, -0.75},
			IMUPitch: -0.0625, IMURate: 0.5, Contacts: ContactLeft}}},
		{"command", Message{Version: 2, Type: TypeCommand, Seq: 1235, Command: Command{Joints: 2, Torque: [MaxJoints]float32{3.5, -12.25}, Status: StatusOK}}},
		{"heartbeat", Message{Version: 2, Type: TypeHeartbeat, Seq: 1235}},
		{"stop", Message{Version: 2, Type: TypeStop, Seq: 1235, Stop: Stop{Reason: StopWatchdog, Text: "no command for 50 ms"}}},
		// What a board that greeted with version 1 gets: the same config
		// in the version-1 layout, without the watchdog.
		{"config_v1", Message{Version: 1, Type: TypeConfig, Seq: 0, Config: Config{TickHz: 1000, Lockstep: true, Joints: 2,
			JointNames: [MaxJoints]string{"hip_left", "hip_right"}, TorqueLimit: [MaxJoints]float32{40, 40}}}},
	}
}

// crcBitwise is the bit-at-a-time definition of CRC-16/CCITT-FALSE, written
// independently of the table version it checks.
func crcBitwise(p []byte) uint16 {
	crc := uint16(0xFFFF)
	for _, b := range p {
		crc ^= uint16(b) << 8
		for range 8 {
			if crc&0x8000 != 0 {
				crc = crc<<1 ^ 0x1021
			} else {
				crc <<= 1
			}
		}
	}
	return crc
}

func TestCRC16(t *testing.T) {
	tests := []struct {
		name string
		in   string
		want uint16
	}{
		// Check value from the published CRC catalogue entry for
		// CRC-16/CCITT-FALSE (from memory; also stated in DESIGN.md).
		{"catalogue check value", "123456789", 0x29B1},
		// The empty input leaves the initial value untouched (follows from
		// the definition: init 0xFFFF, xorout 0).
		{"empty", "", 0xFFFF},
	}
	for _, tc := range tests {
		if got := CRC16([]byte(tc.in)); got != tc.want {
			t.Errorf("%s: CRC16(%q) = 0x%04X, want 0x%04X", tc.name, tc.in, got, tc.want)
		}
	}
	rng := rand.New(rand.NewPCG(1, 2))
	buf := make([]byte, 600)
	for i := range 200 {
		p := buf[:rng.IntN(len(buf))]
		for j := range p {
			p[j] = byte(rng.Uint32())
		}
		if got, want := CRC16(p), crcBitwise(p); got != want {
			t.Fatalf("case %d (%d bytes): table CRC 0x%04X, bitwise 0x%04X", i, len(p), got, want)
		}
		k := len(p) / 3
		if got, want := UpdateCRC16(CRC16(p[:k]), p[k:]), CRC16(p); got != want {
			t.Fatalf("case %d: split CRC 0x%04X, whole 0x%04X", i, got, want)
		}
	}
}

func seqBytes(from, to int) []byte { // inclusive
	var b []byte
	for i := from; i <= to; i++ {
		b = append(b, byte(i))
	}
	return b
}

func cat(parts ...[]byte) []byte { return bytes.Join(parts, nil) }

func TestCOBSVectors(t *testing.T) {
	// The commonly quoted worked examples of COBS (from memory), which follow
	// from the definition in Cheshire and Baker 1999. Encoded forms are given
	// without the trailing zero delimiter.
	tests := []struct {
		name      string
		raw, wire []byte
	}{
		{"empty", []byte{}, []byte{0x01}},
		{"one zero", []byte{0x00}, []byte{0x01, 0x01}},
		{"two zeros", []byte{0x00, 0x00}, []byte{0x01, 0x01, 0x01}},
		{"zero inside", []byte{0x11, 0x22, 0x00, 0x33}, []byte{0x03, 0x11, 0x22, 0x02, 0x33}},
		{"no zero", []byte{0x11, 0x22, 0x33, 0x44}, []byte{0x05, 0x11, 0x22, 0x33, 0x44}},
		{"trailing zeros", []byte{0x11, 0x00, 0x00, 0x00}, []byte{0x02, 0x11, 0x01, 0x01, 0x01}},
		{"254 non-zero bytes", seqBytes(0x01, 0xFE), cat([]byte{0xFF}, seqBytes(0x01, 0xFE))},
		{"zero then 254 non-zero", seqBytes(0x00, 0xFE), cat([]byte{0x01, 0xFF}, seqBytes(0x01, 0xFE))},
		{"255 non-zero bytes", seqBytes(0x01, 0xFF), cat([]byte{0xFF}, seqBytes(0x01, 0xFE), []byte{0x02, 0xFF})},
		{"254 non-zero then zero", cat(seqBytes(0x02, 0xFF), []byte{0x00}), cat([]byte{0xFF}, seqBytes(0x02, 0xFF), []byte{0x01, 0x01})},
		{"253 non-zero, zero, one", cat(seqBytes(0x03, 0xFF), []byte{0x00, 0x01}), cat([]byte{0xFE}, seqBytes(0x03, 0xFF), []byte{0x02, 0x01})},
	}
	for _, tc := range tests {
		dst := make([]byte, COBSMaxLen(len(tc.raw)))
		n, err := EncodeCOBS(dst, tc.raw)
		if err != nil {
			t.Fatalf("%s: EncodeCOBS: %v", tc.name, err)
		}
		if !bytes.Equal(dst[:n], tc.wire) {
			t.Errorf("%s: EncodeCOBS = % X, want % X", tc.name, dst[:n], tc.wire)
		}
		back := make([]byte, len(tc.wire))
		k, err := DecodeCOBS(back, tc.wire)
		if err != nil {
			t.Fatalf("%s: DecodeCOBS: %v", tc.name, err)
		}
		if !bytes.Equal(back[:k], tc.raw) {
			t.Errorf("%s: DecodeCOBS = % X, want % X", tc.name, back[:k], tc.raw)
		}
	}
}

func TestCOBSRoundTripRandom(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for i := range 500 {
		raw := make([]byte, rng.IntN(1200))
		zeroRate := rng.IntN(4) // 0: no zeros … 3: many
		for j := range raw {
			if zeroRate > 0 && rng.IntN(10) < zeroRate {
				continue
			}
			raw[j] = byte(1 + rng.IntN(255))
		}
		wire := make([]byte, COBSMaxLen(len(raw)))
		n, err := EncodeCOBS(wire, raw)
		if err != nil {
			t.Fatal(err)
		}
		if bytes.IndexByte(wire[:n], 0) >= 0 {
			t.Fatalf("case %d: encoded form holds a zero byte", i)
		}
		back := make([]byte, n)
		k, err := DecodeCOBS(back, wire[:n])
		if err != nil || !bytes.Equal(back[:k], raw) {
			t.Fatalf("case %d (%d bytes): round trip failed: err %v", i, len(raw), err)
		}
	}
}

func TestCOBSErrors(t *testing.T) {
	tests := []struct {
		name string
		wire []byte
		want string
	}{
		{"zero code byte", []byte{0x00, 0x11}, "zero byte inside the encoded frame at offset 0"},
		{"zero data byte", []byte{0x03, 0x11, 0x00}, "zero byte inside the encoded frame at offset 2"},
		{"code past end", []byte{0x05, 0x11, 0x22}, "code byte 0x05 at offset 0 runs past the end"},
	}
	for _, tc := range tests {
		dst := make([]byte, 16)
		_, err := DecodeCOBS(dst, tc.wire)
		if !errors.Is(err, ErrCOBS) || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: err = %v, want ErrCOBS with %q", tc.name, err, tc.want)
		}
	}
	if _, err := EncodeCOBS(make([]byte, 3), []byte{1, 2, 3}); err != ErrShortBuffer {
		t.Errorf("EncodeCOBS into a short buffer: err = %v, want ErrShortBuffer", err)
	}
	if _, err := DecodeCOBS(make([]byte, 2), []byte{0x04, 1, 2, 3}); err != ErrShortBuffer {
		t.Errorf("DecodeCOBS into a short buffer: err = %v, want ErrShortBuffer", err)
	}
}

func TestEncodeDecodeRoundTrip(t *testing.T) {
	msgs := exampleMessages()
	// A full-width state and config exercise every slot.
	full := Message{Version: Version, Type: TypeState, Seq: math.MaxUint32, State: State{TimeUS: math.MaxUint64, Joints: MaxJoints, Contacts: ContactLeft | ContactRight}}
	fullCfg := Message{Version: Version, Type: TypeConfig, Seq: 7, Config: Config{TickHz: 65535, Joints: MaxJoints, WatchdogUS: math.MaxUint32}}
	for i := range MaxJoints {
		full.State.Angle[i] = float32(i) * 0.1
		full.State.Rate[i] = -float32(i) * 1.5
		fullCfg.Config.JointNames[i] = strings.Repeat(string(rune('a'+i)), MaxNameLen)
		fullCfg.Config.TorqueLimit[i] = float32(10 * (i + 1))
	}
	msgs = append(msgs, struct {
		name string
		msg  Message
	}{"full state", full}, struct {
		name string
		msg  Message
	}{"full config", fullCfg})
	for _, tc := range msgs {
		buf := make([]byte, MaxFrameLen)
		n, err := Encode(buf, &tc.msg)
		if err != nil {
			t.Fatalf("%s: Encode: %v", tc.name, err)
		}
		if fl := FrameLen(tc.msg.WireVersion(), tc.msg.Type); n != fl {
			t.Errorf("%s: frame is %d bytes, FrameLen says %d", tc.name, n, fl)
		}
		var got Message
		if err := Decode(buf[:n], &got); err != nil {
			t.Fatalf("%s: Decode: %v", tc.name, err)
		}
		if got != tc.msg {
			t.Errorf("%s: round trip\n got %+v\nwant %+v", tc.name, got, tc.msg)
		}
	}
}

func TestFrameLengths(t *testing.T) {
	// The sizes the specification's table in section 3 promises.
	// Version 2 differs only in the config, which gains the u32 watchdog_us.
	want := map[Type]int{TypeGreeting: 76, TypeConfig: 302, TypeState: 94, TypeCommand: 46, TypeHeartbeat: 10, TypeStop: 43}
	for _, v := range []uint8{1, 2} {
		for typ, n := range want {
			if typ == TypeConfig && v == 2 {
				n = 306
			}
			if got := FrameLen(v, typ); got != n {
				t.Errorf("FrameLen(%d, %v) = %d, want %d", v, typ, got, n)
			}
		}
	}
	if FrameLen(Version, 0x7F) != 0 {
		t.Error("FrameLen of an unknown type should be 0")
	}
	if FrameLen(0, TypeState) != 0 || FrameLen(Version+1, TypeState) != 0 {
		t.Error("FrameLen of a version this build does not speak should be 0")
	}
}

// frame encodes m and applies mutate to the frame bytes; if fixCRC, the CRC
// is recomputed so that the mutation is what the decoder sees.
func frame(t *testing.T, m Message, mutate func([]byte) []byte, fixCRC bool) []byte {
	t.Helper()
	buf := make([]byte, MaxFrameLen)
	n, err := Encode(buf, &m)
	if err != nil {
		t.Fatal(err)
	}
	f := mutate(buf[:n])
	if fixCRC && len(f) >= MinFrameLen {
		body := f[:len(f)-CRCLen]
		le.PutUint16(f[len(f)-CRCLen:], CRC16(body))
	}
	return f
}

func TestDecodeErrors(t *testing.T) {
	ex := exampleMessages()
	greeting, state, command := ex[0].msg, ex[2].msg, ex[3].msg
	config, configV1 := ex[1].msg, ex[6].msg
	keep := func(b []byte) []byte { return b }
	tests := []struct {
		name   string
		frame  []byte
		is     error
		substr []string
	}{
		{"empty", nil, ErrTruncated, []string{"0 bytes", "at least 10"}},
		{"header only", frame(t, state, func(b []byte) []byte { return b[:8] }, false), ErrTruncated, []string{"8 bytes"}},
		{"cut payload", frame(t, state, func(b []byte) []byte { return b[:60] }, false), ErrTruncated,
			[]string{"truncated state frame", "84 payload bytes, 50 arrived"}},
		{"trailing bytes", frame(t, state, func(b []byte) []byte { return append(b, 1, 2, 3) }, false), ErrLength,
			[]string{"3 bytes more"}},
		{"too long", make([]byte, MaxFrameLen+1), ErrTooLong, []string{"513 bytes", "512"}},
		{"bad CRC", frame(t, state, func(b []byte) []byte { b[20] ^= 0x40; return b }, false), ErrBadCRC,
			[]string{"bad CRC: got 0x", "computed 0x"}},
		{"wrong version", frame(t, state, func(b []byte) []byte { b[0] = 3; return b }, true), ErrVersion,
			[]string{"the frame speaks version 3", "this side speaks versions 1 to 2"}},
		{"version 0", frame(t, state, func(b []byte) []byte { b[0] = 0; return b }, true), ErrVersion,
			[]string{"the frame speaks version 0", "versions 1 to 2"}},
		{"greeting version field", frame(t, greeting, func(b []byte) []byte { b[8] = 3; return b }, true), ErrVersion,
			[]string{"the greeting speaks version 3", "this side speaks version 2"}},
		{"greeting v1 in a v2 frame", frame(t, greeting, func(b []byte) []byte { b[8] = 1; return b }, true), ErrVersion,
			[]string{"the greeting speaks version 1", "this side speaks version 2"}},
		{"v2 config in a v1 frame", frame(t, config, func(b []byte) []byte { b[0] = 1; return b }, true), ErrLength,
			[]string{"config frame carries 292 payload bytes, this one says 296"}},
		{"v1 config in a v2 frame", frame(t, configV1, func(b []byte) []byte { b[0] = 2; return b }, true), ErrLength,
			[]string{"config frame carries 296 payload bytes, this one says 292"}},
		{"v2 config watchdog 0", frame(t, config, func(b []byte) []byte { clear(b[8+292 : 8+296]); return b }, true), ErrBadField,
			[]string{"field watchdog_us is 0"}},
		{"unknown type", frame(t, state, func(b []byte) []byte { b[1] = 0x42; return b }, true), ErrUnknownType,
			[]string{"unknown message type 0x42"}},
		{"wrong length for type", frame(t, command, func(b []byte) []byte { b[1] = byte(TypeStop); return b }, true), ErrLength,
			[]string{"stop frame carries 33 payload bytes, this one says 36"}},
		{"state joints beyond max", frame(t, state, func(b []byte) []byte { b[8+8] = 9; return b }, true), ErrTooManyJoints,
			[]string{"state: joints 9 is outside 1…8"}},
		{"command zero joints", frame(t, command, func(b []byte) []byte { b[8] = 0; return b }, true), ErrTooManyJoints,
			[]string{"command: joints 0"}},
		{"greeting zero actuators", frame(t, greeting, func(b []byte) []byte { b[9] = 0; return b }, true), ErrTooManyJoints,
			[]string{"greeting: actuators 0"}},
		{"config lockstep 2", frame(t, config, func(b []byte) []byte { b[10] = 2; return b }, true), ErrBadField,
			[]string{"field lockstep is 2"}},
		{"config tick 0", frame(t, config, func(b []byte) []byte { b[8], b[9] = 0, 0; return b }, true), ErrBadField,
			[]string{"tick_hz"}},
		{"valid control", frame(t, state, keep, false), nil, nil},
	}
	for _, tc := range tests {
		var m Message
		err := Decode(tc.frame, &m)
		if tc.is == nil {
			if err != nil {
				t.Errorf("%s: unexpected error %v", tc.name, err)
			}
			continue
		}
		if !errors.Is(err, tc.is) {
			t.Errorf("%s: err = %v, want errors.Is %v", tc.name, err, tc.is)
			continue
		}
		var pe *Error
		if !errors.As(err, &pe) {
			t.Errorf("%s: err %T is not *Error", tc.name, err)
		}
		for _, s := range tc.substr {
			if !strings.Contains(err.Error(), s) {
				t.Errorf("%s: error %q does not mention %q", tc.name, err, s)
			}
		}
	}
}

func TestDecodeVersionKeepsType(t *testing.T) {
	// A greeting from a newer firmware: the rig must learn it was a greeting
	// to answer with a stop (docs/protocol.md section 8).
	f := frame(t, exampleMessages()[0].msg, func(b []byte) []byte { b[0], b[8], b[2] = 3, 3, 9; return b }, true)
	var m Message
	err := Decode(f, &m)
	if !errors.Is(err, ErrVersion) || m.Type != TypeGreeting || m.Seq != 9 || m.Version != 3 {
		t.Fatalf("err %v, type %v, seq %d, version %d; want ErrVersion, greeting, 9, 3", err, m.Type, m.Seq, m.Version)
	}
	// The same when only the greeting's own version field differs from the
	// header's (docs/protocol.md section 6.1, item 8).
	f = frame(t, exampleMessages()[0].msg, func(b []byte) []byte { b[8], b[2] = 3, 7; return b }, true)
	m = Message{}
	err = Decode(f, &m)
	if !errors.Is(err, ErrVersion) || m.Type != TypeGreeting || m.Seq != 7 {
		t.Fatalf("payload version 3: err %v, type %v, seq %d; want ErrVersion, greeting, 7", err, m.Type, m.Seq)
	}
}

func TestBadCRCNamesBothValues(t *testing.T) {
	f := frame(t, exampleMessages()[3].msg, func(b []byte) []byte { return b }, false)
	stored := le.Uint16(f[len(f)-2:])
	le.PutUint16(f[len(f)-2:], stored^0x0101)
	err := Decode(f, new(Message))
	want := "bad CRC: got 0x" + strings.ToUpper(hex4(stored^0x0101)) + ", computed 0x" + strings.ToUpper(hex4(stored))
	if err == nil || err.Error() != want {
		t.Fatalf("err = %v, want %q", err, want)
	}
}

func hex4(v uint16) string {
	const d = "0123456789abcdef"
	return string([]byte{d[v>>12], d[v>>8&0xF], d[v>>4&0xF], d[v&0xF]})
}

func TestEncodeErrors(t *testing.T) {
	long := strings.Repeat("x", MaxNameLen+1)
	tests := []struct {
		name   string
		msg    Message
		is     error
		substr string
	}{
		{"unknown type", Message{Type: 0x55}, ErrUnknownType, "0x55"},
		{"long name", Message{Type: TypeGreeting, Greeting: Greeting{Actuators: 1, Name: long}}, ErrStringTooLong, "name is 33 bytes, at most 32"},
		{"zero in build", Message{Type: TypeGreeting, Greeting: Greeting{Actuators: 1, Build: "a\x00b"}}, ErrStringTooLong, "zero byte"},
		{"long joint name", Message{Type: TypeConfig, Config: Config{TickHz: 1, Joints: 2, JointNames: [MaxJoints]string{"ok", long}, WatchdogUS: 1}}, ErrStringTooLong, "joint_names[1]"},
		{"config v2 watchdog 0", Message{Type: TypeConfig, Config: Config{TickHz: 1, Joints: 1}}, ErrBadField, "watchdog_us is 0"},
		{"version 3", Message{Version: 3, Type: TypeHeartbeat}, ErrVersion, "the message to send speaks version 3, this side speaks versions 1 to 2"},
		{"long stop text", Message{Type: TypeStop, Stop: Stop{Text: long}}, ErrStringTooLong, "text"},
		{"state joints 9", Message{Type: TypeState, State: State{Joints: 9}}, ErrTooManyJoints, "joints 9"},
		{"command joints 0", Message{Type: TypeCommand}, ErrTooManyJoints, "joints 0"},
		{"config tick 0", Message{Type: TypeConfig, Config: Config{Joints: 1}}, ErrBadField, "tick_hz"},
	}
	for _, tc := range tests {
		_, err := Encode(make([]byte, MaxFrameLen), &tc.msg)
		if !errors.Is(err, tc.is) || !strings.Contains(err.Error(), tc.substr) {
			t.Errorf("%s: err = %v, want %v mentioning %q", tc.name, err, tc.is, tc.substr)
		}
	}
	m := exampleMessages()[2].msg
	if _, err := Encode(make([]byte, 10), &m); err != ErrShortBuffer {
		t.Errorf("short buffer: err = %v", err)
	}
}

func TestDecodeUnusedSlotsCleared(t *testing.T) {
	// A firmware may leave junk in unused slots; the receiver ignores it.
	f := frame(t, exampleMessages()[3].msg, func(b []byte) []byte {
		putF32(b[8+4+4*5:], 99)
		return b
	}, true)
	m := Message{Command: Command{Torque: [MaxJoints]float32{0, 0, 7, 7, 7, 7, 7, 7}}}
	if err := Decode(f, &m); err != nil {
		t.Fatal(err)
	}
	for i := 2; i < MaxJoints; i++ {
		if m.Command.Torque[i] != 0 {
			t.Fatalf("slot %d = %v, want 0", i, m.Command.Torque[i])
		}
	}
}

func TestTypeAndReasonNames(t *testing.T) {
	if TypeState.String() != "state" || Type(0xAB).String() != "0xAB" {
		t.Errorf("Type.String: %q %q", TypeState.String(), Type(0xAB).String())
	}
	for code, name := range map[uint8]string{0: "end", 1: "estop", 2: "watchdog", 3: "aborted", 4: "firmware", 5: "bad_version", 6: "mismatch", 7: ""} {
		if got := StopReasonName(code); got != name {
			t.Errorf("StopReasonName(%d) = %q, want %q", code, got, name)
		}
	}
}

// TestConfigVersions checks the two config layouts byte by byte against
// docs/protocol.md section 3.2, written out here independently of the
// encoder: version 1 ends after the torque limits (292 bytes), version 2
// appends the watchdog as a little-endian u32 at offset 292.
func TestConfigVersions(t *testing.T) {
	ex := exampleMessages()
	v2, v1 := ex[1].msg, ex[6].msg
	buf := make([]byte, MaxFrameLen)
	n, err := Encode(buf, &v2)
	if err != nil {
		t.Fatal(err)
	}
	p := buf[HeaderLen : n-CRCLen]
	if buf[0] != 2 || len(p) != 296 || le.Uint16(buf[6:]) != 296 {
		t.Fatalf("v2 config: header version %d, payload %d bytes (length field %d); want 2, 296", buf[0], len(p), le.Uint16(buf[6:]))
	}
	// 50 000 µs = 0x0000C350, low byte first.
	if got := p[292:296]; !bytes.Equal(got, []byte{0x50, 0xC3, 0x00, 0x00}) {
		t.Errorf("watchdog_us bytes % x, want 50 c3 00 00", got)
	}
	v2Payload := append([]byte(nil), p...)
	n, err = Encode(buf, &v1)
	if err != nil {
		t.Fatal(err)
	}
	p = buf[HeaderLen : n-CRCLen]
	if buf[0] != 1 || len(p) != 292 {
		t.Fatalf("v1 config: header version %d, payload %d bytes; want 1, 292", buf[0], len(p))
	}
	if !bytes.Equal(p, v2Payload[:292]) {
		t.Error("the first 292 payload bytes of the v1 and v2 configs differ; version 2 only appends")
	}
	var back Message
	if err := Decode(buf[:n], &back); err != nil || back.Config.WatchdogUS != 0 || back.Version != 1 {
		t.Errorf("v1 config decodes with err %v, watchdog %d, version %d; want nil, 0, 1", err, back.Config.WatchdogUS, back.Version)
	}
	// A v2 config without a watchdog cannot be sent; a v1 config ignores it.
	noWD := v2
	noWD.Config.WatchdogUS = 0
	if _, err := Encode(buf, &noWD); !errors.Is(err, ErrBadField) || !strings.Contains(err.Error(), "watchdog_us") {
		t.Errorf("v2 config without watchdog: err %v, want a bad watchdog_us field", err)
	}
	v1.Config.WatchdogUS = 1234
	if n, err := Encode(buf, &v1); err != nil || n != 302 {
		t.Errorf("v1 config with a watchdog set: %d bytes, err %v; want 302, nil (the field does not exist in v1)", n, err)
	}
}

func TestWireVersion(t *testing.T) {
	tests := []struct {
		m    Message
		want uint8
	}{
		{Message{Type: TypeState}, Version},
		{Message{Version: 1, Type: TypeState}, 1},
		{Message{Type: TypeGreeting, Greeting: Greeting{Version: 1}}, 1},
		{Message{Version: 2, Type: TypeGreeting, Greeting: Greeting{Version: 1}}, 2},
	}
	for _, tc := range tests {
		if got := tc.m.WireVersion(); got != tc.want {
			t.Errorf("%+v: WireVersion %d, want %d", tc.m, got, tc.want)
		}
	}
	// A greeting that sets only its own version goes out consistent.
	buf := make([]byte, MaxFrameLen)
	g := Message{Type: TypeGreeting, Greeting: Greeting{Version: 1, Actuators: 1}}
	n, err := Encode(buf, &g)
	if err != nil || buf[0] != 1 || buf[8] != 1 {
		t.Fatalf("greeting v1: err %v, header %d, payload %d", err, buf[0], buf[8])
	}
	var back Message
	if err := Decode(buf[:n], &back); err != nil || back.Version != 1 {
		t.Errorf("greeting v1 decodes: %v, version %d", err, back.Version)
	}
	// Encode refuses a version it cannot lay out.
	for _, v := range []uint8{Version + 1, 255} {
		m := Message{Version: v, Type: TypeHeartbeat}
		if _, err := Encode(buf, &m); !errors.Is(err, ErrVersion) {
			t.Errorf("Encode version %d: err %v, want ErrVersion", v, err)
		}
	}
}
