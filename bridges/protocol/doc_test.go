package protocol

import (
	"bytes"
	"encoding/hex"
	"flag"
	"fmt"
	"os"
	"regexp"
	"strings"
	"testing"
)

var update = flag.Bool("update", false, "rewrite the generated examples in docs/protocol.md")

const docPath = "../../docs/protocol.md"

var exampleDescriptions = map[string]string{
	"greeting":  "Greeting, seq 0: version 2, 2 actuators, name `bench-walker`, build `fw-0.3.1`.",
	"config":    "Config of version 2, seq 0: 1000 Hz, lockstep, 2 joints `hip_left` and `hip_right`, torque limit 40 N·m each, watchdog 50 000 µs (bytes `50 c3 00 00` at payload offset 292, frame offset 300).",
	"config_v1": "The same config as a version-1 firmware gets it (section 8): the version-1 layout, no watchdog, header version 1.",
	"state":     "State, seq 1235: time 1 234 000 µs, 2 joints, angles 0.25 and −0.125 rad, rates 1.5 and −0.75 rad/s, IMU pitch −0.0625 rad, IMU rate 0.5 rad/s, left foot in contact.",
	"command":   "Command answering that state, seq 1235: 2 joints, torques 3.5 and −12.25 N·m, status 0.",
	"heartbeat": "Heartbeat, seq 1235.",
	"stop":      "Stop, seq 1235: reason 2 (`watchdog`), text `no command for 50 ms`.",
}

func hexDump(b []byte) string {
	var sb strings.Builder
	for off := 0; off < len(b); off += 16 {
		end := min(off+16, len(b))
		fmt.Fprintf(&sb, "%04x: % x\n", off, b[off:end])
	}
	return sb.String()
}

// generatedExamples renders section 11's body and the JSON block of section
// 10 from the encoder.
func generatedExamples(t *testing.T) (examples, jsonBlock string) {
	var ex, js strings.Builder
	for _, e := range exampleMessages() {
		f := make([]byte, MaxFrameLen)
		n, err := Encode(f, &e.msg)
		if err != nil {
			t.Fatal(err)
		}
		w, err := AppendWire(nil, make([]byte, MaxFrameLen), &e.msg)
		if err != nil {
			t.Fatal(err)
		}
		crc := le.Uint16(f[n-2:])
		title := e.name
		if v := e.msg.WireVersion(); v != Version {
			title = fmt.Sprintf("%s, version %d", e.msg.Type, v)
		}
		fmt.Fprintf(&ex, "### %s (type 0x%02x)\n\n%s Frame: %d bytes, CRC 0x%04X (last two bytes `%02x %02x`).\n\n",
			title, uint8(e.msg.Type), exampleDescriptions[e.name], n, crc, f[n-2], f[n-1])
		fmt.Fprintf(&ex, "<!-- example %s frame -->\n```\n%s```\n\nOn a byte stream (%d bytes with the delimiter):\n\n", e.name, hexDump(f[:n]), len(w))
		fmt.Fprintf(&ex, "<!-- example %s wire -->\n```\n%s```\n\n", e.name, hexDump(w))
		j, err := AppendJSON(nil, &e.msg)
		if err != nil {
			t.Fatal(err)
		}
		js.Write(j)
		js.WriteByte('\n')
	}
	return ex.String(), js.String()
}

func between(doc, begin, end string) (pre, mid, post string, ok bool) {
	i := strings.Index(doc, begin)
	j := strings.Index(doc, end)
	if i < 0 || j < i {
		return "", "", "", false
	}
	i += len(begin)
	return doc[:i], doc[i:j], doc[j:], true
}

var exampleBlock = regexp.MustCompile("(?s)<!-- example (\\w+) (frame|wire) -->\n```\n(.*?)```")

// TestDocExamples checks that the example frames and JSON lines in
// docs/protocol.md are exactly what this package produces, by parsing the
// hex back out of the document. Run with -update to regenerate them.
func TestDocExamples(t *testing.T) {
	raw, err := os.ReadFile(docPath)
	if err != nil {
		t.Fatalf("reading the specification: %v", err)
	}
	doc := string(raw)
	examples, jsonLines := generatedExamples(t)
	if *update {
		pre, _, post, ok := between(doc, "<!-- examples begin -->\n", "<!-- examples end -->")
		if !ok {
			t.Fatal("examples markers missing")
		}
		doc = pre + "\n" + examples + post
		pre, _, post, ok = between(doc, "<!-- json begin -->\n```json\n", "```\n<!-- json end -->")
		if !ok {
			t.Fatal("json markers missing")
		}
		doc = pre + jsonLines + post
		if err := os.WriteFile(docPath, []byte(doc), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	// Independent check: parse every hex block and compare with the encoder.
	found := map[string]bool{}
	for _, mm := range exampleBlock.FindAllStringSubmatch(doc, -1) {
		name, kind, body := mm[1], mm[2], mm[3]
		var hexDigits strings.Builder
		for _, line := range strings.Split(body, "\n") {
			if k := strings.Index(line, ":"); k >= 0 {
				line = line[k+1:]
			}
			hexDigits.WriteString(strings.ReplaceAll(line, " ", ""))
		}
		got, err := hex.DecodeString(hexDigits.String())
		if err != nil {
			t.Fatalf("example %s %s: bad hex: %v", name, kind, err)
		}
		var msg *Message
		for _, e := range exampleMessages() {
			if e.name == name {
				msg = &e.msg
			}
		}
		if msg == nil {
			t.Fatalf("document has an example %q the test does not know", name)
		}
		var want []byte
		if kind == "frame" {
			want = make([]byte, MaxFrameLen)
			n, _ := Encode(want, msg)
			want = want[:n]
			var back Message
			if err := Decode(got, &back); err != nil || back != *msg {
				t.Errorf("example %s frame does not decode to the message: %v", name, err)
			}
		} else {
			want, _ = AppendWire(nil, make([]byte, MaxFrameLen), msg)
		}
		if !bytes.Equal(got, want) {
			t.Errorf("example %s %s in the document:\n%s\nencoder:\n%s", name, kind, hexDump(got), hexDump(want))
		}
		found[name+" "+kind] = true
	}
	for _, e := range exampleMessages() {
		for _, kind := range []string{"frame", "wire"} {
			if !found[e.name+" "+kind] {
				t.Errorf("document lacks the %s %s example (run go test -run TestDocExamples -update)", e.name, kind)
			}
		}
	}
	_, js, _, ok := between(doc, "<!-- json begin -->\n```json\n", "```\n<!-- json end -->")
	if !ok || js != jsonLines {
		t.Errorf("JSON examples in the document differ from AppendJSON:\n%s\nwant\n%s", js, jsonLines)
	}
}
