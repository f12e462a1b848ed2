// Package e2e holds end-to-end tests that drive gaitrig against real outside
// parts: the example C firmware compiled with gcc, over a real
// pseudo-terminal pair.
package e2e

import (
	"bytes"
	"context"
	"encoding/binary"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/inproc"
	"gaitrig/bridges/protocol"
	"gaitrig/bridges/serial"
	"gaitrig/firmware/reference"
	"gaitrig/hil"
	"gaitrig/internal/retrytest"
	"gaitrig/plant"
	"gaitrig/record"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// cSourceDir is the example firmware, relative to this package.
const cSourceDir = "../testdata/firmware/c"

// cflags are the flags the firmware must build with, warning-free
// (testdata/firmware/c/Makefile uses the same).
var cflags = []string{"-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic", "-O2"}

// requireTool finds an outside program. Missing, it fails the test when
// GAITRIG_REQUIRE_TOOLS=1 (as .ci/run sets) and otherwise skips with a
// message saying what is missing.
func requireTool(t testing.TB, name string) string {
	t.Helper()
	p, err := exec.LookPath(name)
	if err == nil {
		return p
	}
	if os.Getenv("GAITRIG_REQUIRE_TOOLS") == "1" {
		t.Fatalf("%s is required (GAITRIG_REQUIRE_TOOLS=1) but not found: %v", name, err)
	}
	t.Skipf("%s not found (%v); install it or set GAITRIG_REQUIRE_TOOLS=1 to make this a failure", name, err)
	return ""
}

// cBinaries are the firmware and self-test built for one test.
type cBinaries struct {
	firmware string
	selftest string
}

// buildC compiles the firmware and the self-test into a temporary
// directory with gcc and the project's warning flags.
func buildC(t testing.TB) cBinaries {
	t.Helper()
	gcc := requireTool(t, "gcc")
	dir := t.TempDir()
	b := cBinaries{firmware: filepath.Join(dir, "gaitrig-cfw"), selftest: filepath.Join(dir, "selftest")}
	// GAITRIG_CFW_EXTRA_CFLAGS adds flags after the project's, for example
	// "-g -fsanitize=address,undefined" to run every test on an
	// instrumented build.
	extra := strings.Fields(os.Getenv("GAITRIG_CFW_EXTRA_CFLAGS"))
	build := func(out string, sources ...string) {
		args := append(append(append([]string{}, cflags...), extra...), "-o", out)
		for _, s := range sources {
			args = append(args, filepath.Join(cSourceDir, s))
		}
		args = append(args, "-lm")
		ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
		defer cancel()
		outb, err := exec.CommandContext(ctx, gcc, args...).CombinedOutput()
		if err != nil {
			t.Fatalf("gcc %s failed: %v\n%s", strings.Join(args, " "), err, outb)
		}
		if len(bytes.TrimSpace(outb)) > 0 {
			t.Fatalf("gcc printed diagnostics for %s (the firmware must build silently):\n%s", out, outb)
		}
	}
	build(b.firmware, "main_posix.c", "protocol.c", "controller.c")
	build(b.selftest, "selftest.c", "protocol.c", "controller.c")
	return b
}

// runSelftest runs the self-test with arguments and returns its output. A
// non-zero exit fails the test with the output.
func runSelftest(t *testing.T, bin string, args ...string) string {
	t.Helper()
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	out, err := exec.CommandContext(ctx, bin, args...).CombinedOutput()
	if err != nil {
		t.Fatalf("selftest %s: %v\n%s", strings.Join(args, " "), err, out)
	}
	return string(out)
}

// TestCProtocolSelftest runs the C self-test's built-in checks: the CRC
// check value, COBS vectors, float packing, round trips of every message
// and refusal of damaged frames.
func TestCProtocolSelftest(t *testing.T) {
	b := buildC(t)
	out := runSelftest(t, b.selftest)
	if strings.Contains(out, "FAIL") || !strings.HasPrefix(strings.TrimSpace(out), "ok:") {
		t.Fatalf("C self-test reported failures:\n%s", out)
	}
	t.Logf("C self-test: %s", strings.TrimSpace(out))
}

// TestCCOBSMatchesGo checks the C COBS code against the Go one on inputs
// chosen to hit the block boundaries (253, 254, 255 and 508 non-zero bytes)
// and on seeded random inputs with few and many zeros: C must encode each
// input to exactly the Go encoding and decode it back.
func TestCCOBSMatchesGo(t *testing.T) {
	b := buildC(t)
	rng := rand.New(rand.NewPCG(3, 1999))
	var inputs [][]byte
	for _, n := range []int{0, 1, 2, 253, 254, 255, 256, 507, 508, 509, 600} {
		nonzero := make([]byte, n)
		for i := range nonzero {
			nonzero[i] = byte(1 + rng.IntN(255))
		}
		inputs = append(inputs, nonzero)
		zeros := make([]byte, n)
		inputs = append(inputs, zeros)
		if n > 0 {
			endsZero := append([]byte(nil), nonzero...)
			endsZero[n-1] = 0
			inputs = append(inputs, endsZero)
		}
	}
	for range 200 {
		n := rng.IntN(520)
		p := rng.Float64() // zero density from none to nearly all
		in := make([]byte, n)
		for i := range in {
			if rng.Float64() >= p {
				in[i] = byte(1 + rng.IntN(255))
			}
		}
		inputs = append(inputs, in)
	}
	var file strings.Builder
	file.WriteString("# raw | COBS from the Go encoder\n")
	for _, in := range inputs {
		enc := make([]byte, protocol.COBSMaxLen(len(in)))
		k, err := protocol.EncodeCOBS(enc, in)
		if err != nil {
			t.Fatalf("Go EncodeCOBS of %d bytes: %v", len(in), err)
		}
		fmt.Fprintf(&file, "%s | %s\n", hex.EncodeToString(in), hex.EncodeToString(enc[:k]))
	}
	path := filepath.Join(t.TempDir(), "cobs.txt")
	if err := os.WriteFile(path, []byte(file.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	out := runSelftest(t, b.selftest, "cobs", path)
	want := fmt.Sprintf("ok: %d COBS checks, 0 failed", 2*len(inputs))
	if !strings.Contains(out, want) {
		t.Fatalf("C and Go COBS disagree; want %q in the output:\n%s", want, out)
	}
}

// cResult is one line of "selftest frames": a decoded message or a refusal.
type cResult struct {
	msg     protocol.Message
	refused int // proto_result code, 0 if decoded
	text    string
}

var frameLine = regexp.MustCompile(`^line (\d+): (.*)$`)

// decodeWithC feeds frames to the C decoder and returns its verdict on each.
func decodeWithC(t *testing.T, selftest string, frames [][]byte) []cResult {
	t.Helper()
	var file strings.Builder
	for _, f := range frames {
		file.WriteString(hex.EncodeToString(f))
		file.WriteByte('\n')
	}
	path := filepath.Join(t.TempDir(), "frames.txt")
	if err := os.WriteFile(path, []byte(file.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	out := runSelftest(t, selftest, "frames", path)
	res := make([]cResult, len(frames))
	seen := make([]bool, len(frames))
	for _, line := range strings.Split(strings.TrimSpace(out), "\n") {
		m := frameLine.FindStringSubmatch(line)
		if m == nil {
			t.Fatalf("unexpected line from the C decoder: %q", line)
		}
		n, _ := strconv.Atoi(m[1])
		if n < 1 || n > len(frames) {
			t.Fatalf("C decoder answered for line %d of %d", n, len(frames))
		}
		r := &res[n-1]
		seen[n-1] = true
		r.text = m[2]
		if rest, ok := strings.CutPrefix(m[2], "refused: "); ok {
			code, _, _ := strings.Cut(rest, " ")
			r.refused, _ = strconv.Atoi(code)
			if r.refused == 0 {
				t.Fatalf("C refusal without a code: %q", line)
			}
			continue
		}
		if err := protocol.ParseJSON([]byte(m[2]), &r.msg); err != nil {
			t.Fatalf("the C decoder's JSON for frame %d does not parse: %v\n%s", n, err, m[2])
		}
	}
	for i, ok := range seen {
		if !ok {
			t.Fatalf("the C decoder said nothing about frame %d (%x)", i+1, frames[i])
		}
	}
	return res
}

// C result codes (testdata/firmware/c/protocol.h, enum proto_result) and
// the Go error kinds each one corresponds to. Where the specification lists
// a check under one heading and the Go code reports it under another, both
// are accepted and named here: an extra byte (C "extra", Go KindLength), a
// joint count out of range (C "field", Go KindTooManyJoints) and a greeting
// whose payload version differs (C "field", Go KindVersion).
var cCodeKinds = map[int][]protocol.Kind{
	1: {protocol.KindTruncated},
	2: {protocol.KindTooLong},
	3: {protocol.KindLength},
	4: {protocol.KindBadCRC},
	5: {protocol.KindVersion},
	6: {protocol.KindUnknownType},
	7: {protocol.KindLength},
	8: {protocol.KindBadField, protocol.KindTooManyJoints, protocol.KindVersion},
}

// sameMessage compares two decoded messages field by field, floats by
// their bits (so NaN payloads and -0 count), and says what differs.
func sameMessage(a, b *protocol.Message) string {
	if a.Type != b.Type || a.Seq != b.Seq {
		return fmt.Sprintf("type/seq %v/%d vs %v/%d", a.Type, a.Seq, b.Type, b.Seq)
	}
	f32 := func(name string, x, y []float32, n int) string {
		for i := range n {
			if math.Float32bits(x[i]) != math.Float32bits(y[i]) && !(math.IsNaN(float64(x[i])) && math.IsNaN(float64(y[i]))) {
				return fmt.Sprintf("%s[%d] %v vs %v", name, i, x[i], y[i])
			}
		}
		return ""
	}
	switch a.Type {
	case protocol.TypeGreeting:
		if a.Greeting != b.Greeting {
			return fmt.Sprintf("greeting %+v vs %+v", a.Greeting, b.Greeting)
		}
	case protocol.TypeConfig:
		x, y := a.Config, b.Config
		if x.TickHz != y.TickHz || x.Lockstep != y.Lockstep || x.Joints != y.Joints || x.JointNames != y.JointNames {
			return fmt.Sprintf("config %+v vs %+v", x, y)
		}
		return f32("torque_limit", x.TorqueLimit[:], y.TorqueLimit[:], int(x.Joints))
	case protocol.TypeState:
		x, y := a.State, b.State
		if x.TimeUS != y.TimeUS || x.Joints != y.Joints || x.Contacts != y.Contacts {
			return fmt.Sprintf("state %+v vs %+v", x, y)
		}
		n := int(x.Joints)
		if d := f32("angle", x.Angle[:], y.Angle[:], n) + f32("rate", x.Rate[:], y.Rate[:], n); d != "" {
			return d
		}
		return f32("imu", []float32{x.IMUPitch, x.IMURate}, []float32{y.IMUPitch, y.IMURate}, 2)
	case protocol.TypeCommand:
		x, y := a.Command, b.Command
		if x.Joints != y.Joints || x.Status != y.Status {
			return fmt.Sprintf("command %+v vs %+v", x, y)
		}
		return f32("torque", x.Torque[:], y.Torque[:], int(x.Joints))
	case protocol.TypeStop:
		if a.Stop != b.Stop {
			return fmt.Sprintf("stop %+v vs %+v", a.Stop, b.Stop)
		}
	}
	return ""
}

// compareDecoders decodes frames with Go and with C and requires the same
// verdict: the same message, or a refusal of a corresponding kind.
func compareDecoders(t *testing.T, selftest string, frames [][]byte, label func(i int) string) {
	t.Helper()
	res := decodeWithC(t, selftest, frames)
	for i, f := range frames {
		var gm protocol.Message
		gerr := protocol.Decode(f, &gm)
		c := res[i]
		if c.refused == cErrVersion && otherKnownVersion(f) {
			// Go speaks every version from MinVersion on, the C firmware
			// only cVersion: a sound frame of another version Go speaks is
			// one C must refuse as a version error, whatever Go makes of it.
			continue
		}
		switch {
		case gerr == nil && c.refused != 0:
			t.Errorf("%s: Go decodes it, C refuses it: %s\nframe %x", label(i), c.text, f)
		case gerr != nil && c.refused == 0:
			t.Errorf("%s: Go refuses it (%v), C decodes it: %s\nframe %x", label(i), gerr, c.text, f)
		case gerr != nil:
			var pe *protocol.Error
			if !errors.As(gerr, &pe) {
				t.Errorf("%s: Go refusal is not a *protocol.Error: %v", label(i), gerr)
				continue
			}
			ok := false
			for _, k := range cCodeKinds[c.refused] {
				ok = ok || k == pe.Kind
			}
			if !ok {
				t.Errorf("%s: Go refuses it as %v (kind %d), C as %q\nframe %x", label(i), gerr, pe.Kind, c.text, f)
			}
		default:
			if d := sameMessage(&gm, &c.msg); d != "" {
				t.Errorf("%s: Go and C decode it differently: %s\nframe %x", label(i), d, f)
			}
		}
	}
}

// cVersion is the protocol version the C firmware speaks (PROTO_VERSION in
// protocol.h; TestCFirmwareSession checks its greeting says so), and
// cErrVersion the C decoder's result code for a frame of another version.
const (
	cVersion    = 2
	cErrVersion = 5
)

// otherKnownVersion reports whether f passes the checks that come before
// the version (size, length field, CRC: docs/protocol.md section 5) and
// speaks a version the Go decoder speaks but the C firmware does not.
func otherKnownVersion(f []byte) bool {
	if len(f) < protocol.MinFrameLen || len(f) > protocol.MaxFrameLen {
		return false
	}
	plen := int(binary.LittleEndian.Uint16(f[6:]))
	if plen+protocol.MinFrameLen != len(f) || binary.LittleEndian.Uint16(f[len(f)-2:]) != protocol.CRC16(f[:len(f)-2]) {
		return false
	}
	return f[0] != cVersion && protocol.KnownVersion(f[0])
}

// randomMessages builds seeded messages of every type with fields across
// their ranges, special floats included.
func randomMessages(rng *rand.Rand, n int) []protocol.Message {
	specials := []float32{0, float32(math.Copysign(0, -1)), 1, -1, float32(math.Inf(1)), float32(math.Inf(-1)),
		float32(math.NaN()), math.MaxFloat32, math.SmallestNonzeroFloat32, 1e-20, 123456.789}
	f := func() float32 {
		if rng.IntN(4) == 0 {
			return specials[rng.IntN(len(specials))]
		}
		return float32(rng.NormFloat64() * 10)
	}
	word := func(max int) string {
		const letters = "abcdefghijklmnopqrstuvwxyz0123456789_-. "
		b := make([]byte, rng.IntN(max+1))
		for i := range b {
			b[i] = letters[rng.IntN(len(letters))]
		}
		return string(b)
	}
	types := []protocol.Type{protocol.TypeGreeting, protocol.TypeConfig, protocol.TypeState,
		protocol.TypeCommand, protocol.TypeHeartbeat, protocol.TypeStop}
	out := make([]protocol.Message, 0, n)
	for i := range n {
		m := protocol.Message{Type: types[i%len(types)], Seq: rng.Uint32()}
		joints := uint8(1 + rng.IntN(protocol.MaxJoints))
		switch m.Type {
		case protocol.TypeGreeting:
			m.Greeting = protocol.Greeting{Version: protocol.Version, Actuators: joints,
				Name: word(protocol.MaxNameLen), Build: word(protocol.MaxNameLen)}
		case protocol.TypeConfig:
			m.Config = protocol.Config{TickHz: uint16(1 + rng.IntN(65535)), Lockstep: rng.IntN(2) == 1, Joints: joints,
				WatchdogUS: 1 + rng.Uint32N(math.MaxUint32)}
			for j := range int(joints) {
				m.Config.JointNames[j] = word(protocol.MaxNameLen)
				m.Config.TorqueLimit[j] = f()
			}
		case protocol.TypeState:
			m.State = protocol.State{TimeUS: rng.Uint64(), Joints: joints, Contacts: uint8(rng.IntN(4)),
				IMUPitch: f(), IMURate: f()}
			for j := range int(joints) {
				m.State.Angle[j], m.State.Rate[j] = f(), f()
			}
		case protocol.TypeCommand:
			m.Command = protocol.Command{Joints: joints, Status: uint16(rng.IntN(4))}
			for j := range int(joints) {
				m.Command.Torque[j] = f()
			}
		case protocol.TypeStop:
			m.Stop = protocol.Stop{Reason: uint8(rng.IntN(9)), Text: word(protocol.MaxNameLen)}
		}
		out = append(out, m)
	}
	return out
}

// TestCDecoderMatchesGo encodes seeded random messages of every type with
// the Go encoder and requires the C decoder to read exactly the same
// message (and re-encode it to the same bytes, which the self-test checks);
// then damages frames in the ways section 5 of docs/protocol.md lists and
// requires C to refuse each one as Go does.
func TestCDecoderMatchesGo(t *testing.T) {
	b := buildC(t)
	rng := rand.New(rand.NewPCG(1, 2))
	msgs := randomMessages(rng, 120)
	var frames [][]byte
	var labels []string
	add := func(f []byte, label string) {
		frames = append(frames, f)
		labels = append(labels, label)
	}
	var buf [protocol.MaxFrameLen]byte
	for i := range msgs {
		n, err := protocol.Encode(buf[:], &msgs[i])
		if err != nil {
			t.Fatalf("Go Encode of random message %d (%v): %v", i, msgs[i].Type, err)
		}
		good := append([]byte(nil), buf[:n]...)
		add(good, fmt.Sprintf("%v frame %d", msgs[i].Type, i))
	}
	resign := func(f []byte) []byte {
		n := len(f)
		crc := protocol.CRC16(f[:n-2])
		f[n-2], f[n-1] = byte(crc), byte(crc>>8)
		return f
	}
	good := len(frames)
	for i := range good {
		f := frames[i]
		mut := func(label string, g func([]byte) []byte) {
			add(g(append([]byte(nil), f...)), fmt.Sprintf("%s, %s", labels[i], label))
		}
		pos := rng.IntN(len(f))
		mut(fmt.Sprintf("bit flip at byte %d", pos), func(g []byte) []byte { g[pos] ^= 1 << rng.IntN(8); return g })
		mut("last byte cut", func(g []byte) []byte { return g[:len(g)-1] })
		mut("one byte extra", func(g []byte) []byte { return append(g, 0) })
		mut("version 2, CRC fixed", func(g []byte) []byte { g[0] = 2; return resign(g) })
		mut("type 0x7E, CRC fixed", func(g []byte) []byte { g[1] = 0x7E; return resign(g) })
		mut("header cut to 9 bytes", func(g []byte) []byte { return g[:9] })
	}
	// Field checks of section 5 item 8, reached with a valid CRC.
	fieldCases := []struct {
		label string
		typ   protocol.Type
		off   int // payload offset
		val   byte
	}{
		{"greeting actuators 0", protocol.TypeGreeting, 1, 0},
		{"greeting actuators 9", protocol.TypeGreeting, 1, 9},
		{"greeting payload version 2", protocol.TypeGreeting, 0, 2},
		{"config lockstep 2", protocol.TypeConfig, 2, 2},
		{"config joints 0", protocol.TypeConfig, 3, 0},
		{"config joints 9", protocol.TypeConfig, 3, 9},
		{"state joints 0", protocol.TypeState, 8, 0},
		{"command joints 9", protocol.TypeCommand, 0, 9},
	}
	for _, fc := range fieldCases {
		for i := range good {
			if frames[i][1] != byte(fc.typ) {
				continue
			}
			g := append([]byte(nil), frames[i]...)
			g[protocol.HeaderLen+fc.off] = fc.val
			add(resign(g), fc.label)
			break
		}
	}
	{
		// tick_hz 0: two bytes
		for i := range good {
			if frames[i][1] == byte(protocol.TypeConfig) {
				g := append([]byte(nil), frames[i]...)
				g[protocol.HeaderLen], g[protocol.HeaderLen+1] = 0, 0
				add(resign(g), "config tick_hz 0")
				break
			}
		}
	}
	// A frame longer than any version may send, and a heartbeat whose length
	// field claims a stop's payload.
	long := make([]byte, protocol.MaxFrameLen+1)
	long[0], long[1] = protocol.Version, byte(protocol.TypeHeartbeat)
	add(long, "513-byte frame")
	hb := []byte{1, byte(protocol.TypeHeartbeat), 0, 0, 0, 0, protocol.StopLen, 0}
	hb = append(hb, make([]byte, protocol.StopLen+2)...)
	add(resign(hb), "heartbeat with a 33-byte payload")

	compareDecoders(t, b.selftest, frames, func(i int) string { return labels[i] })
	t.Logf("%d frames (%d valid, %d damaged) decoded alike by C and Go", len(frames), good, len(frames)-good)
}

// docExample is one example of docs/protocol.md section 11: a frame and
// the same frame as it goes on a byte stream.
type docExample struct {
	name        string // message type name, as in the marker
	frame, wire []byte
}

// exampleMarker opens each hex dump of section 11.
var exampleMarker = regexp.MustCompile(`^<!-- example (\w+) (frame|wire) -->$`)

// dumpLine is one line of a hex dump: an offset, then hex byte pairs.
var dumpLine = regexp.MustCompile(`^([0-9a-fA-F]{4}): ((?:[0-9a-fA-F]{2} ?)+)$`)

// readSpec reads docs/protocol.md, the protocol specification the C and
// Go codecs are both checked against.
func readSpec(t *testing.T) []byte {
	t.Helper()
	doc, err := os.ReadFile("../docs/protocol.md")
	if err != nil {
		t.Fatalf("reading the protocol specification: %v", err)
	}
	return doc
}

// docExamples reads the example frames of docs/protocol.md section 11: each
// "<!-- example NAME frame|wire -->" marker followed by a fenced hex dump
// with offsets.
func docExamples(t *testing.T) []docExample {
	t.Helper()
	doc := readSpec(t)
	_, rest, ok := bytes.Cut(doc, []byte("<!-- examples begin -->"))
	if !ok {
		t.Fatal("docs/protocol.md has no '<!-- examples begin -->' marker")
	}
	block, _, ok := bytes.Cut(rest, []byte("<!-- examples end -->"))
	if !ok {
		t.Fatal("docs/protocol.md has no '<!-- examples end -->' marker")
	}
	var out []docExample
	byName := map[string]int{}
	lines := strings.Split(string(block), "\n")
	for i := 0; i < len(lines); i++ {
		m := exampleMarker.FindStringSubmatch(strings.TrimSpace(lines[i]))
		if m == nil {
			continue
		}
		// The dump is the next fenced block.
		for i++; i < len(lines) && strings.TrimSpace(lines[i]) != "```"; i++ {
		}
		var data []byte
		for i++; i < len(lines) && strings.TrimSpace(lines[i]) != "```"; i++ {
			d := dumpLine.FindStringSubmatch(strings.TrimSpace(lines[i]))
			if d == nil {
				t.Fatalf("docs/protocol.md: example %s %s: line %q is not \"OFFSET: hex bytes\"", m[1], m[2], lines[i])
			}
			if off, _ := strconv.ParseUint(d[1], 16, 32); int(off) != len(data) {
				t.Fatalf("docs/protocol.md: example %s %s: offset %s after %d bytes", m[1], m[2], d[1], len(data))
			}
			b, err := hex.DecodeString(strings.ReplaceAll(d[2], " ", ""))
			if err != nil {
				t.Fatalf("docs/protocol.md: example %s %s: %v", m[1], m[2], err)
			}
			data = append(data, b...)
		}
		k, seen := byName[m[1]]
		if !seen {
			k = len(out)
			byName[m[1]] = k
			out = append(out, docExample{name: m[1]})
		}
		if m[2] == "frame" {
			out[k].frame = data
		} else {
			out[k].wire = data
		}
	}
	return out
}

// docJSON reads the JSON debug lines of docs/protocol.md section 10, one
// per message type: the document's own statement of what the example frames
// of section 11 hold.
func docJSON(t *testing.T) map[string]protocol.Message {
	t.Helper()
	doc := readSpec(t)
	_, rest, ok := bytes.Cut(doc, []byte("## 10. JSON debug encoding"))
	if !ok {
		t.Fatal("docs/protocol.md has no section 10 (JSON debug encoding)")
	}
	_, rest, _ = bytes.Cut(rest, []byte("```json"))
	body, _, _ := bytes.Cut(rest, []byte("```"))
	out := map[string]protocol.Message{}
	for _, line := range strings.Split(strings.TrimSpace(string(body)), "\n") {
		var m protocol.Message
		if err := protocol.ParseJSON([]byte(line), &m); err != nil {
			t.Fatalf("docs/protocol.md section 10 line %q: %v", line, err)
		}
		out[m.Type.Name()] = m
	}
	return out
}

// TestCDecodesDocExamples feeds the example frames of docs/protocol.md
// section 11 to the C decoder. Each must decode to the message the
// document's JSON form (section 10) describes and to what the Go decoder
// reads, and the C COBS encoder must produce the byte-stream form the
// document shows, delimiter aside.
func TestCDecodesDocExamples(t *testing.T) {
	b := buildC(t)
	examples := docExamples(t)
	described := docJSON(t)
	types := []protocol.Type{protocol.TypeGreeting, protocol.TypeConfig, protocol.TypeState,
		protocol.TypeCommand, protocol.TypeHeartbeat, protocol.TypeStop}
	have := map[string]bool{}
	for _, e := range examples {
		have[e.name] = true
		if len(e.frame) == 0 || len(e.wire) == 0 {
			t.Fatalf("docs/protocol.md example %s lacks its frame or its byte-stream form", e.name)
		}
	}
	for _, ty := range types {
		if !have[ty.Name()] {
			t.Errorf("docs/protocol.md has no example frame of type %s (0x%02X)", ty.Name(), byte(ty))
		}
	}
	frames := make([][]byte, len(examples))
	for i, e := range examples {
		frames[i] = e.frame
	}
	res := decodeWithC(t, b.selftest, frames)
	for i, e := range examples {
		r := res[i]
		if e.frame[0] != cVersion {
			// An example of what a version-1 board gets: the C firmware
			// speaks version 2 only and must refuse it as such.
			if r.refused != cErrVersion {
				t.Errorf("example %s is of version %d; C must refuse it as a version error, got %s", e.name, e.frame[0], r.text)
			}
			continue
		}
		if r.refused != 0 {
			t.Errorf("example %s of the document is refused by C: %s\n%x", e.name, r.text, e.frame)
			continue
		}
		want, ok := described[e.name]
		if !ok {
			t.Errorf("docs/protocol.md section 10 has no JSON line for %s", e.name)
			continue
		}
		if d := sameMessage(&want, &r.msg); d != "" {
			t.Errorf("example %s: C decodes something else than section 10 describes: %s", e.name, d)
		}
	}
	compareDecoders(t, b.selftest, frames, func(i int) string { return "doc example " + examples[i].name })

	var file strings.Builder
	for _, e := range examples {
		if e.wire[len(e.wire)-1] != 0 || bytes.IndexByte(e.wire[:len(e.wire)-1], 0) >= 0 {
			t.Errorf("example %s: the byte-stream form must hold exactly one zero, at the end", e.name)
			continue
		}
		fmt.Fprintf(&file, "%x | %x\n", e.frame, e.wire[:len(e.wire)-1])
	}
	path := filepath.Join(t.TempDir(), "doc-cobs.txt")
	if err := os.WriteFile(path, []byte(file.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	out := runSelftest(t, b.selftest, "cobs", path)
	if !strings.Contains(out, fmt.Sprintf("ok: %d COBS checks, 0 failed", 2*len(examples))) {
		t.Fatalf("the C COBS code disagrees with the document's byte-stream forms:\n%s", out)
	}
	t.Logf("%d example frames of docs/protocol.md: C decodes each to its section-10 description and writes its byte-stream form", len(examples))
}

// TestCLawMatchesGo runs the C port of the control law and the Go law
// (firmware/reference.Law) on the same seeded readings and requires the
// same stance leg and bit-identical torques, for the torso walker and the
// compass walker, with the rig's torque limit above and below the law's
// own. Readings are float32 values, as they arrive in a state frame, and
// include saturating, tied and all-switches-open cases. A reading with a
// NaN or infinite value is where the two deliberately part: the C firmware
// answers zero torques with the fault and safe-mode bits.
func TestCLawMatchesGo(t *testing.T) {
	b := buildC(t)
	rng := rand.New(rand.NewPCG(7, 11))
	type reading struct {
		joints, contacts int
		limit            float32
		v                [6]float32 // a0 a1 r0 r1 pitch pitch_rate
	}
	var rs []reading
	limits := []float32{60, 50, 40, 0, float32(math.NaN())}
	for i := range 3000 {
		r := reading{joints: 1 + i%2, contacts: rng.IntN(4), limit: limits[rng.IntN(len(limits))]}
		scale := []float64{0.05, 0.5, 3}[rng.IntN(3)]
		for k := range r.v {
			r.v[k] = float32(rng.NormFloat64() * scale * (1 + float64(k/2)))
		}
		if rng.IntN(10) == 0 {
			r.v[1] = r.v[0] // both feet down with equal leg angles: the tie rule
			r.v[3] = r.v[2]
		}
		rs = append(rs, r)
	}
	nonFinite := []float32{float32(math.NaN()), float32(math.Inf(1)), float32(math.Inf(-1))}
	for k := range 6 {
		r := reading{joints: 2, contacts: 1, limit: 60}
		r.v[k] = nonFinite[k%3]
		rs = append(rs, r)
	}
	var file strings.Builder
	for _, r := range rs {
		fmt.Fprintf(&file, "%d %d %08x", r.joints, r.contacts, math.Float32bits(r.limit))
		for _, v := range r.v {
			fmt.Fprintf(&file, " %08x", math.Float32bits(v))
		}
		file.WriteByte('\n')
	}
	path := filepath.Join(t.TempDir(), "law.txt")
	if err := os.WriteFile(path, []byte(file.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	out := runSelftest(t, b.selftest, "law", path)
	lines := strings.Split(strings.TrimSpace(out), "\n")
	if len(lines) != len(rs) {
		t.Fatalf("C law printed %d lines for %d readings:\n%s", len(lines), len(rs), out)
	}
	mismatches := 0
	for i, r := range rs {
		var n, stance int
		var t0, t1 uint64
		var f0, f1 uint32
		var status uint16
		if _, err := fmt.Sscanf(lines[i], "line %d: %d %x %x | %x %x %d", &n, &stance, &t0, &t1, &f0, &f1, &status); err != nil || n != i+1 {
			t.Fatalf("C law line %d unreadable (%v): %q", i+1, err, lines[i])
		}
		// The Go reference firmware's limit rule (reference.Serve): the
		// rig's smallest limit replaces the law's when positive and lower.
		g := reference.DefaultGains()
		if lim := float64(r.limit); lim > 0 && lim < g.TorqueLimit {
			g.TorqueLimit = lim
		}
		in := reference.Reading{Joints: r.joints, Contacts: uint8(r.contacts),
			Pitch: float64(r.v[4]), PitchRate: float64(r.v[5])}
		for j := range r.joints {
			in.Angle[j], in.Rate[j] = float64(r.v[j]), float64(r.v[2+j])
		}
		var tau [2]float64
		goStance := reference.Law(&g, &in, tau[:r.joints])
		finite := true
		for _, v := range r.v {
			finite = finite && !math.IsNaN(float64(v)) && !math.IsInf(float64(v), 0)
		}
		bad := func(format string, a ...any) {
			mismatches++
			if mismatches <= 10 {
				t.Errorf("reading %d %+v: "+format, append([]any{i + 1, r}, a...)...)
			}
		}
		if stance != goStance {
			bad("stance C %d, Go %d", stance, goStance)
		}
		// Bit-identical, except that NaN payloads may differ (C's NAN and Go's
		// math.NaN() are different quiet NaNs).
		same := func(c uint64, g float64) bool {
			return c == math.Float64bits(g) || (math.IsNaN(math.Float64frombits(c)) && math.IsNaN(g))
		}
		if !same(t0, tau[0]) || (r.joints == 2 && !same(t1, tau[1])) {
			bad("law torques C (%v, %v), Go (%v, %v)", math.Float64frombits(t0), math.Float64frombits(t1), tau[0], tau[1])
		}
		wantF := [2]uint32{math.Float32bits(float32(tau[0])), math.Float32bits(float32(tau[1]))}
		wantStatus := protocol.StatusOK
		if !finite {
			wantF = [2]uint32{0, 0}
			wantStatus = protocol.StatusFault | protocol.StatusSafeMode
		}
		if f0 != wantF[0] || (r.joints == 2 && f1 != wantF[1]) || status != wantStatus {
			bad("command C (%08x %08x status %d), want (%08x %08x status %d)", f0, f1, status, wantF[0], wantF[1], wantStatus)
		}
	}
	if mismatches > 0 {
		t.Fatalf("%d of %d readings differ between the C and Go laws", mismatches, len(rs))
	}
	t.Logf("%d readings: C and Go laws agree to the bit", len(rs))
}

// ---- the firmware process over a real pty --------------------------------

// firmwareProc is the C firmware running as a child process on the
// follower side of a pty pair.
type firmwareProc struct {
	cmd    *exec.Cmd
	stderr *syncBuffer
	done   chan struct{}
	err    error // of cmd.Wait, valid after done
}

// syncBuffer is a bytes.Buffer safe for the writer goroutine of exec and
// the test reading it.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// openPty opens a real pty pair with serial.NewPty, which puts the
// follower into raw mode at once, so no byte is echoed or translated before
// the firmware sets its own mode. Both ends are closed when the test ends.
//
// The leader is marked close-on-exec here: serial.NewPty makes it with
// unix.Dup, which clears that flag, so without this every child process
// (the firmware) would inherit the leader and keep the line up after the
// rig closes its end, and an unplug would go unnoticed.
func openPty(t testing.TB) *serial.Pty {
	t.Helper()
	p, err := serial.NewPty()
	if err != nil {
		t.Fatalf("opening a pty pair: %v", err)
	}
	t.Cleanup(func() { p.Close() })
	sc, err := p.Master.SyscallConn()
	if err == nil {
		err = sc.Control(func(fd uintptr) { syscall.CloseOnExec(int(fd)) })
	}
	if err != nil {
		t.Fatalf("marking the pty leader close-on-exec: %v", err)
	}
	return p
}

// startFirmware starts the C firmware on the tty path. The process is
// killed when ctx ends or the test ends, whichever is first, and always
// waited for, so no process outlives the test.
func startFirmware(t testing.TB, ctx context.Context, bin, tty string) *firmwareProc {
	t.Helper()
	p := &firmwareProc{stderr: &syncBuffer{}, done: make(chan struct{})}
	args := []string{bin, "-v", "--once", tty} // --once: the tests read the exit status of one run
	// GAITRIG_CFW_WRAPPER runs the firmware under a checker, for example
	// "valgrind --error-exitcode=99 -q": the checker's complaints land in
	// the firmware's stderr and its exit status fails the test.
	if w := strings.Fields(os.Getenv("GAITRIG_CFW_WRAPPER")); len(w) > 0 {
		args = append(w, args...)
	}
	p.cmd = exec.CommandContext(ctx, args[0], args[1:]...)
	p.cmd.Stderr = p.stderr
	p.cmd.WaitDelay = 2 * time.Second
	if err := p.cmd.Start(); err != nil {
		t.Fatalf("starting the C firmware: %v", err)
	}
	go func() {
		p.err = p.cmd.Wait()
		close(p.done)
	}()
	t.Cleanup(func() {
		select {
		case <-p.done:
		default:
			_ = p.cmd.Process.Kill()
			<-p.done
		}
		if t.Failed() {
			t.Logf("C firmware stderr:\n%s", p.stderr.String())
		}
	})
	return p
}

// wait waits for the firmware to exit on its own within d and returns its
// exit code.
func (p *firmwareProc) wait(t testing.TB, d time.Duration) int {
	t.Helper()
	select {
	case <-p.done:
	case <-time.After(d):
		t.Fatalf("the C firmware did not exit within %v\nstderr:\n%s", d, p.stderr.String())
	}
	var ee *exec.ExitError
	if errors.As(p.err, &ee) {
		return ee.ExitCode()
	}
	if p.err != nil {
		t.Fatalf("waiting for the C firmware: %v", p.err)
	}
	return 0
}

// counters parses the firmware's "cfw: counters ..." line.
func (p *firmwareProc) counters(t testing.TB) map[string]string {
	t.Helper()
	for _, line := range strings.Split(p.stderr.String(), "\n") {
		rest, ok := strings.CutPrefix(line, "cfw: counters ")
		if !ok {
			continue
		}
		out := map[string]string{}
		for _, kv := range strings.Fields(rest) {
			k, v, _ := strings.Cut(kv, "=")
			out[k] = v
		}
		return out
	}
	t.Fatalf("the C firmware printed no counters line\nstderr:\n%s", p.stderr.String())
	return nil
}

// counter is one numeric counter.
func counter(t testing.TB, c map[string]string, key string) uint64 {
	t.Helper()
	v, err := strconv.ParseUint(c[key], 10, 64)
	if err != nil {
		t.Fatalf("firmware counter %q is %q: %v", key, c[key], err)
	}
	return v
}

// rigEnd is a minimal rig speaking the protocol on the pty leader, for
// session tests that need no plant.
type rigEnd struct {
	t       *testing.T
	w       io.Writer
	msgs    chan protocol.Message
	errs    chan error
	scratch [protocol.MaxFrameLen]byte
}

func newRigEnd(t *testing.T, f *os.File) *rigEnd {
	r := &rigEnd{t: t, w: f, msgs: make(chan protocol.Message, 256), errs: make(chan error, 256)}
	rd := protocol.NewReader(f)
	go func() {
		for {
			var m protocol.Message
			err := rd.ReadMessage(&m)
			if err != nil {
				var pe *protocol.Error
				if errors.As(err, &pe) {
					r.errs <- err
					continue
				}
				close(r.msgs) // the leader was closed or the follower hung up
				return
			}
			r.msgs <- m
		}
	}()
	return r
}

func (r *rigEnd) send(m *protocol.Message) {
	r.t.Helper()
	wire, err := protocol.AppendWire(nil, r.scratch[:], m)
	if err != nil {
		r.t.Fatalf("encoding %v: %v", m.Type, err)
	}
	r.raw(wire)
}

func (r *rigEnd) raw(b []byte) {
	r.t.Helper()
	if _, err := r.w.Write(b); err != nil {
		r.t.Fatalf("writing to the pty: %v", err)
	}
}

// hangBound bounds each wait of these tests for a message or an exit that
// will come: a bound on a hang, never a timing check. The C firmware is
// another process, which a loaded CI host may not run for a second or more.
const hangBound = 20 * time.Second

// next returns the next message from the firmware, skipping heartbeats when
// skipHeartbeats is set.
func (r *rigEnd) next(d time.Duration, skipHeartbeats bool) protocol.Message {
	r.t.Helper()
	deadline := time.After(d)
	for {
		select {
		case m, ok := <-r.msgs:
			if !ok {
				r.t.Fatalf("the firmware's side of the pty closed while a message was expected")
			}
			if skipHeartbeats && m.Type == protocol.TypeHeartbeat {
				continue
			}
			return m
		case err := <-r.errs:
			r.t.Fatalf("the rig side refused a frame from the C firmware: %v", err)
		case <-deadline:
			r.t.Fatalf("no message from the C firmware within %v", d)
		}
	}
}

// awaitGreeting requires the firmware's first message (heartbeats aside)
// to be its greeting, as every session with the firmware begins.
func (r *rigEnd) awaitGreeting() {
	r.t.Helper()
	if g := r.next(hangBound, true); g.Type != protocol.TypeGreeting {
		r.t.Fatalf("want a greeting first, got %v", g.Type)
	}
}

// startSession is the set-up of the session tests: a fresh pty pair, the
// C firmware bin on its follower (killed when ctx ends or the test ends)
// and a minimal rig on its leader.
func startSession(t *testing.T, ctx context.Context, bin string) (*serial.Pty, *firmwareProc, *rigEnd) {
	t.Helper()
	tty := openPty(t)
	fw := startFirmware(t, ctx, bin, tty.Path)
	return tty, fw, newRigEnd(t, tty.Master)
}

// demoConfig is the config a rig sends for a walker with a torso.
func demoConfig() protocol.Message {
	m := protocol.Message{Type: protocol.TypeConfig}
	m.Config = protocol.Config{TickHz: 1000, Lockstep: true, Joints: 2, WatchdogUS: 50000}
	m.Config.JointNames[0], m.Config.JointNames[1] = "hip_left", "hip_right"
	m.Config.TorqueLimit[0], m.Config.TorqueLimit[1] = 60, 60
	return m
}

// TestCFirmwareSession drives the C firmware's session over a real pty
// with a minimal rig: greeting, config, states answered with commands that
// echo the seq, a resent state answered identically, garbage and damaged
// frames counted without losing the next state, a burst of states answered
// newest first, a heartbeat on a quiet line, and a normal stop that ends
// the process with status 0.
func TestCFirmwareSession(t *testing.T) {
	b := buildC(t)
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	_, fw, rig := startSession(t, ctx, b.firmware)

	g := rig.next(hangBound, true)
	if g.Type != protocol.TypeGreeting || g.Seq != 0 || g.Greeting.Version != protocol.Version || g.Greeting.Actuators != 2 {
		t.Fatalf("first message: want a version-%d greeting with seq 0 and 2 actuators, got %+v", protocol.Version, g)
	}
	// Without a config the greeting repeats (every 500 ms, section 6), also
	// while noise keeps arriving: a bad block every 50 ms.
	start := time.Now()
	noise := 0
	for repeated := false; !repeated; {
		rig.raw([]byte{0x05, 0x11, 0x00}) // a code byte that runs past the end
		noise++
		select {
		case m, ok := <-rig.msgs:
			if !ok || m.Type != protocol.TypeGreeting {
				t.Fatalf("want the greeting repeated while no config came, got %+v (open %v)", m, ok)
			}
			repeated = true
		case <-time.After(50 * time.Millisecond):
			// A bound on a hang, 40 repeat periods: a firmware whose
			// timer the noise holds back never greets again, however long
			// the wait; one on a busy host only greets late.
			if time.Since(start) > 20*time.Second {
				t.Fatal("the greeting was not repeated within 20 s while noise arrived")
			}
		}
	}
	t.Logf("greeting repeated after %v, with %d noise blocks in between", time.Since(start).Round(time.Millisecond), noise)

	cfg := demoConfig()
	rig.send(&cfg)
	state := func(seq uint32) protocol.Message {
		m := protocol.Message{Type: protocol.TypeState, Seq: seq}
		m.State = protocol.State{TimeUS: uint64(seq) * 1000, Joints: 2, Contacts: protocol.ContactLeft,
			IMUPitch: -0.05, IMURate: 0.1}
		m.State.Angle[0], m.State.Angle[1] = -0.1, 0.2
		m.State.Rate[0], m.State.Rate[1] = -1, 1
		return m
	}
	answer := func(seq uint32) protocol.Message {
		t.Helper()
		s := state(seq)
		rig.send(&s)
		for {
			c := rig.next(hangBound, true)
			if c.Type == protocol.TypeGreeting {
				continue // a repeat sent before the config arrived
			}
			if c.Type != protocol.TypeCommand || c.Seq != seq || c.Command.Joints != 2 {
				t.Fatalf("state %d: want a 2-joint command echoing seq %d, got %+v", seq, seq, c)
			}
			for j := range 2 {
				tq := float64(c.Command.Torque[j])
				if math.IsNaN(tq) || math.Abs(tq) > 60 {
					t.Fatalf("state %d: torque %d is %v, outside the 60 N·m limit", seq, j, tq)
				}
			}
			return c
		}
	}
	for seq := uint32(1); seq <= 50; seq++ {
		answer(seq)
	}
	// A state sent again with the same seq (the rig thought it lost the
	// command) gets the same command back: the law does not advance twice.
	first := answer(51)
	again := answer(51)
	if first.Command != again.Command {
		t.Fatalf("resent state 51: commands differ, %+v then %+v", first.Command, again.Command)
	}

	// Damage: garbage that is not valid COBS, a state with one flipped bit
	// (bad CRC), a truncated heartbeat, then two zeros in a row (ignored
	// silently). The firmware must count exactly three errors and answer
	// the next state normally.
	rig.raw([]byte{0x13, 0x37, 0xC0, 0xFF, 0xEE, 0x00})
	rig.raw(wireOf(t, ptr(state(52)), func(f []byte) []byte { f[20] ^= 0x40; return f }))
	rig.raw(wireOf(t, &protocol.Message{Type: protocol.TypeHeartbeat}, func(f []byte) []byte { return f[:6] }))
	rig.raw([]byte{0x00, 0x00})
	answer(52)

	// A burst of states in one write, as from a wall-clock rig that got
	// ahead: the firmware answers the newest it has read and skips older
	// ones (section 7). How the pty splits the burst between reads is up to
	// the kernel, so the test asks for increasing seqs ending at the newest,
	// not for a fixed number of answers.
	var burst []byte
	for seq := uint32(53); seq <= 57; seq++ {
		burst = append(burst, wireOf(t, ptr(state(seq)), func(f []byte) []byte { return f })...)
	}
	rig.raw(burst)
	burstAnswers := 0
	for last := uint32(52); last != 57; {
		c := rig.next(hangBound, true)
		if c.Type != protocol.TypeCommand || c.Seq <= last || c.Seq > 57 {
			t.Fatalf("burst of states 53…57: want commands with increasing seqs up to 57, got %+v after seq %d", c, last)
		}
		last = c.Seq
		burstAnswers++
	}
	t.Logf("burst of 5 states answered with %d commands", burstAnswers)

	// A quiet line gets heartbeats (section 6: after 100 ms without sending).
	hb := rig.next(hangBound, false)
	if hb.Type != protocol.TypeHeartbeat || hb.Seq != 57 {
		t.Fatalf("on a quiet line: want a heartbeat with the last state's seq 57, got %+v", hb)
	}

	stop := protocol.Message{Type: protocol.TypeStop, Seq: 57, Stop: protocol.Stop{Reason: protocol.StopEnd, Text: "session test done"}}
	rig.send(&stop)
	if code := fw.wait(t, hangBound); code != 0 {
		t.Fatalf("after a normal stop the firmware must exit 0, got %d\nstderr:\n%s", code, fw.stderr.String())
	}
	c := fw.counters(t)
	if got, want := counter(t, c, "frame_errors"), uint64(3+noise); got != want {
		t.Errorf("firmware frame_errors = %d, want %d (%d noise blocks, garbage, bad CRC, truncated)\nstderr:\n%s", got, want, noise, fw.stderr.String())
	}
	if got := counter(t, c, "repeats"); got != 1 {
		t.Errorf("firmware repeats = %d, want 1", got)
	}
	if got, want := counter(t, c, "commands"), uint64(53+burstAnswers); got != want {
		t.Errorf("firmware commands = %d, want %d (52 states, one resend, %d answers to the burst)", got, want, burstAnswers)
	}
	if got, want := counter(t, c, "skipped"), uint64(5-burstAnswers); got != want {
		t.Errorf("firmware skipped = %d states, want %d of the burst", got, want)
	}
	if c["end"] != "stop" {
		t.Errorf("firmware end = %q, want \"stop\"", c["end"])
	}
}

func ptr[T any](v T) *T { return &v }

// wireOf encodes m, lets damage change the frame, and returns the damaged
// frame COBS-encoded with its delimiter: damage to the frame, not to the
// stuffing, so it reaches the frame checks.
func wireOf(t *testing.T, m *protocol.Message, damage func([]byte) []byte) []byte {
	t.Helper()
	frame := make([]byte, protocol.MaxFrameLen)
	n, err := protocol.Encode(frame, m)
	if err != nil {
		t.Fatalf("encoding %v: %v", m.Type, err)
	}
	f := damage(frame[:n])
	wire := make([]byte, protocol.COBSMaxLen(len(f))+1)
	k, err := protocol.EncodeCOBS(wire, f)
	if err != nil {
		t.Fatal(err)
	}
	return wire[:k+1]
}

// TestCFirmwareRefusesOtherVersion sends the firmware (version 2) a valid
// frame of protocol version 3: it must answer with a stop (bad_version)
// naming both versions and exit 1 (docs/protocol.md section 8).
func TestCFirmwareRefusesOtherVersion(t *testing.T) {
	b := buildC(t)
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	_, fw, rig := startSession(t, ctx, b.firmware)
	rig.awaitGreeting()
	rig.raw([]byte{0})
	rig.raw(wireOf(t, ptr(demoConfig()), func(f []byte) []byte {
		f[0] = 3
		crc := protocol.CRC16(f[:len(f)-2])
		f[len(f)-2], f[len(f)-1] = byte(crc), byte(crc>>8)
		return f
	}))
	var stop protocol.Message
	for {
		stop = rig.next(hangBound, true)
		if stop.Type != protocol.TypeGreeting {
			break
		}
	}
	if stop.Type != protocol.TypeStop || stop.Stop.Reason != protocol.StopBadVersion {
		t.Fatalf("want stop(bad_version) after a version-3 frame, got %+v", stop)
	}
	if !strings.Contains(stop.Stop.Text, "v2") || !strings.Contains(stop.Stop.Text, "v3") {
		t.Errorf("stop text %q should name both versions", stop.Stop.Text)
	}
	if code := fw.wait(t, hangBound); code != 1 {
		t.Fatalf("after a version mismatch the firmware must exit 1, got %d", code)
	}
	if !strings.Contains(fw.stderr.String(), "frame speaks version 3, this side speaks version 2") {
		t.Errorf("firmware log should name both versions:\n%s", fw.stderr.String())
	}
}

// TestCFirmwareSurvivesGarbage floods a configured firmware with 256 kB of
// seeded random bytes (stretches with few zeros, giving overlong runs, and
// with many, giving short and truncated frames), then sends a valid state.
// The firmware must answer it, and it must count exactly as many refused
// frames as the Go stream reader and decoder find in the same bytes: the
// two implementations of section 4 and 5 resynchronize alike.
func TestCFirmwareSurvivesGarbage(t *testing.T) {
	b := buildC(t)
	rng := rand.New(rand.NewPCG(42, 4242))
	var garbage []byte
	for len(garbage) < 256<<10 {
		n := 1 + rng.IntN(4096)
		zeroRate := []float64{0, 0.001, 0.01, 0.1, 0.5}[rng.IntN(5)]
		for range n {
			if rng.Float64() < zeroRate {
				garbage = append(garbage, 0)
			} else {
				garbage = append(garbage, byte(1+rng.IntN(255)))
			}
		}
	}
	garbage = append(garbage, 0) // end the last stretch before the valid state

	// What the Go side makes of the same bytes.
	want := 0
	rd := protocol.NewReader(bytes.NewReader(garbage))
	for {
		f, err := rd.Next()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			want++
			continue
		}
		var m protocol.Message
		if err := protocol.Decode(f, &m); err != nil {
			want++
			continue
		}
		t.Fatalf("seeded garbage holds a valid %v frame; choose another seed", m.Type)
	}

	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	_, fw, rig := startSession(t, ctx, b.firmware)
	rig.awaitGreeting()
	rig.send(ptr(demoConfig()))
	// Written in pieces, as a noisy line delivers it; the firmware reads
	// concurrently, so the pty buffer never fills.
	for off := 0; off < len(garbage); off += 1000 {
		rig.raw(garbage[off:min(off+1000, len(garbage))])
	}
	st := protocol.Message{Type: protocol.TypeState, Seq: 1, State: protocol.State{Joints: 2, Contacts: protocol.ContactLeft}}
	rig.send(&st)
	for {
		c := rig.next(hangBound, true)
		if c.Type == protocol.TypeGreeting {
			continue
		}
		if c.Type != protocol.TypeCommand || c.Seq != 1 {
			t.Fatalf("after the garbage: want the command for state 1, got %+v", c)
		}
		break
	}
	rig.send(&protocol.Message{Type: protocol.TypeStop, Seq: 1, Stop: protocol.Stop{Reason: protocol.StopEnd}})
	if code := fw.wait(t, hangBound); code != 0 {
		t.Fatalf("the firmware must survive garbage and exit 0 on the stop, got %d", code)
	}
	c := fw.counters(t)
	if got := counter(t, c, "frame_errors"); got != uint64(want) {
		t.Errorf("the C firmware counted %d refused frames in the garbage, the Go reader and decoder %d", got, want)
	}
	t.Logf("%d bytes of garbage: %d refused frames on both sides", len(garbage), want)
}

// TestCFirmwareRefusesConfig sends configurations the firmware cannot
// drive: it must answer each with a stop (reason firmware) that says why,
// send no command, and exit 1.
func TestCFirmwareRefusesConfig(t *testing.T) {
	b := buildC(t)
	tests := []struct {
		name   string
		change func(c *protocol.Config)
		reason string
	}{
		{"three joints", func(c *protocol.Config) {
			c.Joints = 3
			c.JointNames[2], c.TorqueLimit[2] = "knee", 30
		}, "joint count mismatch"},
		{"unknown joint names", func(c *protocol.Config) {
			c.JointNames[0], c.JointNames[1] = "shoulder", "elbow"
		}, "need joints hip_left, hip_right"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
			defer cancel()
			_, fw, rig := startSession(t, ctx, b.firmware)
			rig.awaitGreeting()
			cfg := demoConfig()
			tc.change(&cfg.Config)
			rig.send(&cfg)
			for {
				m := rig.next(hangBound, true)
				if m.Type == protocol.TypeGreeting {
					continue
				}
				if m.Type != protocol.TypeStop || m.Stop.Reason != protocol.StopFirmware || m.Stop.Text != tc.reason {
					t.Fatalf("want stop(firmware, %q), got %+v", tc.reason, m)
				}
				break
			}
			if code := fw.wait(t, hangBound); code != 1 {
				t.Fatalf("a firmware that refuses the config must exit 1, got %d", code)
			}
			if n := counter(t, fw.counters(t), "commands"); n != 0 {
				t.Fatalf("the firmware sent %d commands after refusing the config", n)
			}
		})
	}
}

// TestCFirmwareNoticesUnplug closes the rig's end of the pty in the middle
// of a run, as a pulled cable does: the firmware must notice, print its
// counters and exit 1 instead of spinning on a dead line.
func TestCFirmwareNoticesUnplug(t *testing.T) {
	b := buildC(t)
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	tty, fw, rig := startSession(t, ctx, b.firmware)
	rig.awaitGreeting()
	rig.send(ptr(demoConfig()))
	st := protocol.Message{Type: protocol.TypeState, Seq: 1, State: protocol.State{Joints: 2, Contacts: protocol.ContactLeft}}
	rig.send(&st)
	for {
		if c := rig.next(hangBound, true); c.Type == protocol.TypeCommand {
			break
		}
	}
	// Close closes the leader and the Pty's own handle of the follower,
	// which would otherwise keep the line up for the firmware.
	tty.Close()
	if code := fw.wait(t, hangBound); code != 1 {
		t.Fatalf("after an unplug the firmware must exit 1, got %d", code)
	}
	if c := fw.counters(t); c["end"] != "link-closed" {
		t.Fatalf("counters end = %q, want \"link-closed\"", c["end"])
	}
}

// TestCFirmwareStopsOnSIGTERM interrupts a configured firmware: it must
// tell the rig with a stop frame (reason firmware), print its counters and
// exit 1, rather than vanish and leave the rig to a watchdog trip.
func TestCFirmwareStopsOnSIGTERM(t *testing.T) {
	b := buildC(t)
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	_, fw, rig := startSession(t, ctx, b.firmware)
	rig.awaitGreeting()
	rig.send(ptr(demoConfig()))
	// A heartbeat after the config shows the firmware took it and idles.
	for {
		m := rig.next(hangBound, false)
		if m.Type == protocol.TypeHeartbeat {
			break
		}
	}
	if err := fw.cmd.Process.Signal(syscall.SIGTERM); err != nil {
		t.Fatalf("signalling the firmware: %v", err)
	}
	for {
		m := rig.next(hangBound, true)
		if m.Type == protocol.TypeStop {
			if m.Stop.Reason != protocol.StopFirmware {
				t.Fatalf("want stop reason %d (firmware), got %+v", protocol.StopFirmware, m.Stop)
			}
			break
		}
	}
	if code := fw.wait(t, hangBound); code != 1 {
		t.Fatalf("an interrupted firmware must exit 1, got %d", code)
	}
	if c := fw.counters(t); c["end"] != "interrupted" {
		t.Fatalf("counters end = %q, want \"interrupted\"", c["end"])
	}
}

// demoRun is the walking run of the end-to-end test: the demo walker of
// plant.DemoParams (the walker the reference gains are tuned for) starting
// from reference.DemoStart on level ground, in lockstep at 1 kHz, until 25
// heel strikes or 40 simulated seconds, with the loop's default watchdog
// and resend times: a lockstep watchdog counts only the firmware's answer
// time (hil/lockstep.go), and the assertions count events (a resent state
// may be answered or skipped), so a busy host changes nothing here.
func demoRun(t *testing.T) (hil.Config, *plant.Model, plant.State) {
	t.Helper()
	noTrip := true
	cfg := hil.Config{
		Clock:  hil.Lockstep,
		TickHz: 1000,
		// The plant and sensor settings of the loop's own demo runs
		// (hil/helpers_test.go): swing-foot scuffing ignored as in the
		// simplest walking model, a 4096-count encoder, foot switches
		// closing above 5 N, 60 N·m actuators.
		Physics:   plant.Options{IgnoreScuff: true},
		Sensors:   hil.SensorModel{CountsPerRev: 4096, ContactThreshold: 5},
		Actuators: hil.ActuatorModel{TorqueLimit: 60},
		Duration:  40,
		MaxSteps:  25,
		Criteria:  scenarios.Criteria{MinSteps: 20, NoTrip: &noTrip},
		Seed:      1,
	}
	model, err := plant.New(plant.DemoParams(), cfg.Physics)
	if err != nil {
		t.Fatalf("demo plant: %v", err)
	}
	d := reference.DemoStart
	initial, err := model.Stand(0, 0, d.LegAngles, d.TorsoAngle, d.Rates[:]...)
	if err != nil {
		t.Fatalf("demo start pose: %v", err)
	}
	return cfg, model, initial
}

// runLoop runs the hil loop over conn, recording into a run folder, and
// returns the result and the folder.
func runLoop(t *testing.T, ctx context.Context, cfg hil.Config, model *plant.Model, initial plant.State, conn bridges.Conn, link string) (hil.Result, string) {
	t.Helper()
	mf, err := hil.Manifest(cfg, model, initial, link, "e2e-test")
	if err != nil {
		t.Fatalf("manifest: %v", err)
	}
	dir := filepath.Join(t.TempDir(), "run")
	rec, err := record.Create(dir, mf)
	if err != nil {
		t.Fatalf("creating the run folder: %v", err)
	}
	res, err := hil.Run(ctx, cfg, model, initial, conn, rec)
	if err != nil {
		t.Fatalf("hil.Run over %s: %v", link, err)
	}
	return res, dir
}

// TestCFirmwareWalks is the end-to-end check of the example firmware: the C
// firmware, compiled with gcc, runs as its own process on the follower side
// of a real pty pair; the rig runs the hil loop in lockstep over the serial
// link on the pty's leader side.
// The demo walker (demoRun) must complete at least 20 heel strikes without falling, the
// run must pass its criteria, and neither side may see a single frame
// error. Because the C law is bit-identical to the Go reference law and
// the loop is deterministic in lockstep, the same scenario driven by the
// Go reference firmware over the in-process link must end in exactly the
// same plant state after the same number of ticks.
func TestCFirmwareWalks(t *testing.T) {
	b := buildC(t)
	cfg, model, initial := demoRun(t)
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	defer cancel()

	w := walkOverPty(t, ctx, b.firmware, cfg, model, initial)
	res := w.res
	checkWalk(t, "over a pty pair", res, w.dir, w.conn, w.fw)

	// The same run with the Go reference firmware in-process.
	goRes := runGoReference(t, ctx, cfg, model, initial)
	if goRes.Summary.Steps != res.Summary.Steps || goRes.Summary.Ticks != res.Summary.Ticks {
		t.Errorf("Go reference in-process: %d steps in %d ticks; C over pty: %d steps in %d ticks; want the same",
			goRes.Summary.Steps, goRes.Summary.Ticks, res.Summary.Steps, res.Summary.Ticks)
	}
	if goRes.Final.Q != res.Final.Q || goRes.Final.V != res.Final.V {
		t.Errorf("final plant state differs between the C firmware over pty and the Go reference in-process:\nC:  q=%v v=%v\nGo: q=%v v=%v",
			res.Final.Q, res.Final.V, goRes.Final.Q, goRes.Final.V)
	}
}

// ptyWalk is one walk of the C firmware over a pty pair: what checkWalk
// judges.
type ptyWalk struct {
	res  hil.Result
	dir  string
	conn bridges.Conn
	fw   *firmwareProc
}

// walkOverPty runs the C firmware on a fresh pty pair and process for each
// attempt, running again a walk the host spoiled (retrytest.UntilValid). A run that
// ended invalid told its firmware to stop, so that process ends by itself.
func walkOverPty(t *testing.T, ctx context.Context, bin string, cfg hil.Config, model *plant.Model, initial plant.State) ptyWalk {
	t.Helper()
	return retrytest.UntilValid(t, "the C firmware over a pty pair", func(int) (ptyWalk, record.Summary) {
		p := openPty(t)
		fw := startFirmware(t, ctx, bin, p.Path)
		conn := serial.NewConn(p.Master, "pty "+p.Path, serial.Config{})
		t.Cleanup(func() { conn.Close() })
		res, dir := runLoop(t, ctx, cfg, model, initial, conn, "serial "+p.Path)
		return ptyWalk{res: res, dir: dir, conn: conn, fw: fw}, res.Summary
	})
}

// runGoReference runs the same scenario with the Go reference firmware
// over the in-process link, the run a C firmware run must match to the bit.
// An in-process firmware can be starved too, so an invalid run is run
// again (retrytest.UntilValid).
func runGoReference(t *testing.T, ctx context.Context, cfg hil.Config, model *plant.Model, initial plant.State) hil.Result {
	t.Helper()
	return retrytest.UntilValid(t, "the Go reference in-process", func(int) (hil.Result, record.Summary) {
		rigEnd, fwEnd := inproc.Pair()
		served := make(chan error, 1)
		go func() { served <- reference.Serve(fwEnd, reference.Options{}) }()
		goRes, _ := runLoop(t, ctx, cfg, model, initial, rigEnd, "inproc")
		rigEnd.Close()
		if err := <-served; err != nil {
			t.Errorf("the Go reference firmware ended with %v", err)
		}
		return goRes, goRes.Summary
	})
}

// checkWalk asserts what every walking run of the C firmware must show: at
// least 20 heel strikes, no fall, outcome pass, no frame error on either
// side, every state answered, exit 0 on the rig's normal stop, and a run
// folder that reads back.
func checkWalk(t *testing.T, label string, res hil.Result, dir string, conn bridges.Conn, fw *firmwareProc) {
	t.Helper()
	sum := res.Summary
	code := fw.wait(t, hangBound)
	fwc := fw.counters(t)
	t.Logf("C firmware %s: outcome %s, %d steps, %d ticks, %.1f s simulated in %.1f s; link %+v; firmware %v",
		label, sum.Outcome, sum.Steps, sum.Ticks, sum.SimTimeS, sum.WallTimeS, res.Link, fwc)
	if res.Greeting.Name != "gaitrig-example-c" || res.Greeting.Actuators != 2 {
		t.Errorf("greeting: want gaitrig-example-c with 2 actuators, got %+v", res.Greeting)
	}
	if sum.Steps < 20 {
		t.Errorf("the C firmware walked %d steps, want at least 20 (reason: %q)", sum.Steps, sum.Reason)
	}
	if n := sum.Alarms[scenarios.AlarmFall]; n != 0 {
		t.Errorf("the walker fell (%d fall alarms)", n)
	}
	if sum.Outcome != record.Pass {
		t.Errorf("run outcome %q (%s), want pass; criteria %+v; alarms %v", sum.Outcome, sum.Reason, sum.Criteria, sum.Alarms)
	}
	if st := conn.Stats(); st.FrameErrors != 0 {
		t.Errorf("the rig's serial link counted %d frame errors, want 0 (%+v)", st.FrameErrors, st)
	}
	if res.Link.BadFrames != 0 || res.Link.BadTorques != 0 {
		t.Errorf("the loop rejected %d frames and %d commands' torques, want none", res.Link.BadFrames, res.Link.BadTorques)
	}
	if n := counter(t, fwc, "frame_errors"); n != 0 {
		t.Errorf("the C firmware counted %d frame errors, want 0", n)
	}
	if n := counter(t, fwc, "unexpected"); n != 0 {
		t.Errorf("the C firmware got %d frames of a type the rig should not send", n)
	}
	// Count events, not luck: on a busy host the rig may resend a state
	// whose answer was late, and the C firmware, finding a newer copy
	// waiting, counts the older one as skipped. So every state it received
	// was answered or skipped, it skipped no more states than the rig
	// resent, and it received exactly what the rig sent (a pty loses
	// nothing).
	answered, received, skipped := counter(t, fwc, "commands"), counter(t, fwc, "states"), counter(t, fwc, "skipped")
	if answered+skipped != received {
		t.Errorf("the C firmware answered %d and skipped %d of %d states received; every state is one or the other", answered, skipped, received)
	}
	if skipped > res.Link.Resends {
		t.Errorf("the C firmware skipped %d states but the rig resent only %d; in lockstep only a resent state may be skipped", skipped, res.Link.Resends)
	}
	if received != res.Link.StatesSent {
		t.Errorf("the C firmware received %d states, the rig sent %d", received, res.Link.StatesSent)
	}
	if code != 0 || fwc["end"] != "stop" {
		t.Errorf("the C firmware must exit 0 on the rig's normal stop; exit %d, end %q", code, fwc["end"])
	}
	if res.Link.Commands < uint64(sum.Ticks) {
		t.Errorf("the loop took %d commands for %d ticks; every tick needs one in lockstep", res.Link.Commands, sum.Ticks)
	}
	run, err := record.Open(dir)
	if err != nil {
		t.Fatalf("the run folder does not read back: %v", err)
	}
	if run.Summary.Steps != sum.Steps {
		t.Errorf("summary.json has %d steps, the run returned %d", run.Summary.Steps, sum.Steps)
	}
}

// levelDemo is the level-demo scenario of the library, run as the command
// line runs it (through rig), with the scenario's own watchdog and resend
// times (see demoRun for why they need no widening).
func levelDemo(t *testing.T, link string) (*scenarios.Scenario, rig.Options) {
	t.Helper()
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatalf("loading the level-demo scenario: %v", err)
	}
	if sc.Clock.Mode != scenarios.ClockLockstep {
		t.Fatalf("level-demo runs in clock mode %q; this test needs lockstep", sc.Clock.Mode)
	}
	return sc, rig.Options{Link: link, RunDir: filepath.Join(t.TempDir(), "run")}
}

// TestCFirmwareWalksOverSerialPort is the bench set-up with a cable: socat
// links two pseudo-terminals, the C firmware opens one path, and the rig
// opens the other with serial.Open, that is with go.bug.st/serial, exactly
// as it opens /dev/ttyACM0 for a board. It runs the library's level-demo
// scenario; the walk must meet the same checks as over a single pty pair,
// and end in the same plant state as the Go reference in-process.
func TestCFirmwareWalksOverSerialPort(t *testing.T) {
	b := buildC(t)
	socat := requireTool(t, "socat")
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	defer cancel()

	type socatWalk struct {
		r    rig.Result
		conn bridges.Conn
		fw   *firmwareProc
	}
	// Each attempt links a fresh socat pair to a fresh firmware process.
	w := retrytest.UntilValid(t, "the C firmware over socat-linked ptys", func(int) (socatWalk, record.Summary) {
		fwPath, rigPath := socatPair(t, ctx, socat)

		fw := startFirmware(t, ctx, b.firmware, fwPath)
		sc, o := levelDemo(t, "serial:"+rigPath)
		run, err := rig.Prepare(ctx, sc, o)
		if err != nil {
			t.Fatalf("the rig could not prepare a run over %s: %v", rigPath, err)
		}
		t.Cleanup(func() { run.Close() })
		r, err := run.Run(ctx)
		if err != nil {
			t.Fatalf("run over %s: %v", rigPath, err)
		}
		return socatWalk{r: r, conn: run.Conn(), fw: fw}, r.Loop.Summary
	})
	res := w.r.Loop
	checkWalk(t, "over socat-linked ptys and go.bug.st/serial", res, w.r.Dir, w.conn, w.fw)

	// Same law to the bit, deterministic loop: the same end state as the Go
	// reference in-process, run as `gaitrig run level-demo --link builtin`.
	sc, o := levelDemo(t, "builtin")
	goRun := retrytest.UntilValid(t, "level-demo with the Go reference in-process", func(int) (rig.Result, record.Summary) {
		goRun, err := rig.Run(ctx, sc, o)
		if err != nil {
			t.Fatalf("level-demo with the Go reference in-process: %v", err)
		}
		return goRun, goRun.Loop.Summary
	})
	goRes := goRun.Loop
	if goRes.Summary.Ticks != res.Summary.Ticks || goRes.Final.Q != res.Final.Q || goRes.Final.V != res.Final.V {
		t.Errorf("level-demo: the C firmware over socat ended after %d ticks in q=%v v=%v, the Go reference in-process after %d ticks in q=%v v=%v",
			res.Summary.Ticks, res.Final.Q, res.Final.V, goRes.Summary.Ticks, goRes.Final.Q, goRes.Final.V)
	}
}

// socatPair links two pseudo-terminals with socat, as a cable links a board
// to the rig, and returns their paths (symbolic links socat makes, and
// removes when it ends). socat is killed when the test ends.
func socatPair(t *testing.T, ctx context.Context, socat string) (fwPath, rigPath string) {
	t.Helper()
	dir := t.TempDir()
	fwPath, rigPath = filepath.Join(dir, "firmware-tty"), filepath.Join(dir, "rig-tty")
	relay := exec.CommandContext(ctx, socat,
		"pty,raw,echo=0,link="+fwPath, "pty,raw,echo=0,link="+rigPath)
	relayErr := &syncBuffer{}
	relay.Stderr = relayErr
	relay.WaitDelay = 2 * time.Second
	if err := relay.Start(); err != nil {
		t.Fatalf("starting socat: %v", err)
	}
	relayDone := make(chan struct{})
	go func() { _ = relay.Wait(); close(relayDone) }()
	t.Cleanup(func() {
		_ = relay.Process.Kill()
		<-relayDone
	})
	for deadline := time.Now().Add(5 * time.Second); ; time.Sleep(10 * time.Millisecond) {
		_, e1 := os.Stat(fwPath)
		_, e2 := os.Stat(rigPath)
		if e1 == nil && e2 == nil {
			break
		}
		if time.Now().After(deadline) {
			t.Fatalf("socat made no linked ptys within 5 s: %v %v\n%s", e1, e2, relayErr.String())
		}
	}
	return fwPath, rigPath
}

// BenchmarkCFirmwareRoundTrip measures the state-to-command round trip
// through a real pty to the C firmware process, with the rig's serial link
// on the leader side: back to back, one state in flight, as in lockstep.
// It reports the p50, p99 and largest round trip in microseconds.
//
//	go test ./e2e -run '^$' -bench CFirmwareRoundTrip -benchtime 10000x
func BenchmarkCFirmwareRoundTrip(b *testing.B) {
	bins := buildC(b)
	ctx, cancel := context.WithTimeout(context.Background(), 5*time.Minute)
	defer cancel()
	p := openPty(b)
	fw := startFirmware(b, ctx, bins.firmware, p.Path)
	conn := serial.NewConn(p.Master, "pty "+p.Path, serial.Config{})
	defer conn.Close()

	var m protocol.Message
	recv := func(want protocol.Type) {
		for {
			if err := conn.Recv(time.Now().Add(5*time.Second), &m); err != nil {
				b.Fatalf("waiting for %v from the C firmware: %v", want, err)
			}
			if m.Type == want {
				return
			}
		}
	}
	recv(protocol.TypeGreeting)
	cfg := demoConfig()
	if err := conn.Send(&cfg); err != nil {
		b.Fatal(err)
	}
	st := protocol.Message{Type: protocol.TypeState}
	st.State = protocol.State{Joints: 2, Contacts: protocol.ContactLeft, IMUPitch: -0.1}
	st.State.Angle[0], st.State.Angle[1] = 0.25, -0.25
	var h hil.Histogram
	b.ReportAllocs()
	b.ResetTimer()
	for i := range b.N {
		st.Seq = uint32(i + 1)
		st.State.TimeUS = uint64(i+1) * 1000
		start := time.Now()
		if err := conn.Send(&st); err != nil {
			b.Fatal(err)
		}
		for {
			recv(protocol.TypeCommand)
			if m.Seq == st.Seq {
				break
			}
		}
		h.Add(time.Since(start))
	}
	b.StopTimer()
	b.ReportMetric(float64(h.Quantile(0.5).Microseconds()), "p50-µs")
	b.ReportMetric(float64(h.Quantile(0.99).Microseconds()), "p99-µs")
	b.ReportMetric(float64(h.Max().Microseconds()), "max-µs")
	stop := protocol.Message{Type: protocol.TypeStop, Seq: st.Seq, Stop: protocol.Stop{Reason: protocol.StopEnd, Text: "benchmark done"}}
	if err := conn.Send(&stop); err != nil {
		b.Fatal(err)
	}
	if code := fw.wait(b, 10*time.Second); code != 0 {
		b.Fatalf("the C firmware exited %d after the benchmark", code)
	}
}
