package protocol

import (
	"bytes"
	"encoding/hex"
	"os"
	"regexp"
	"strings"
	"testing"
)

// cobsEndCaseInput is the input of the COBS end-case example in section 4:
// one zero, then the 254 non-zero bytes 01 … FE, so the input ends right
// after a full 254-byte block.
func cobsEndCaseInput() []byte {
	in := []byte{0}
	for b := 1; b <= 254; b++ {
		in = append(in, byte(b))
	}
	return in
}

var cobsEndCaseBlock = regexp.MustCompile("(?s)<!-- cobs end case -->\n```\n(.*?)```")

// TestDocCOBSEndCase checks the end-case example of docs/protocol.md
// section 4 against the encoder, and that a decoder reads both what our
// encoder writes and the extra 01 code byte some encoders append after a
// final full block. With -update it rewrites the block.
func TestDocCOBSEndCase(t *testing.T) {
	raw, err := os.ReadFile(docPath)
	if err != nil {
		t.Fatal(err)
	}
	in := cobsEndCaseInput()
	enc := make([]byte, COBSMaxLen(len(in)))
	n, err := EncodeCOBS(enc, in)
	if err != nil {
		t.Fatal(err)
	}
	wire := append(enc[:n:n], 0)
	doc := string(raw)
	m := cobsEndCaseBlock.FindStringSubmatchIndex(doc)
	if m == nil {
		t.Fatal("docs/protocol.md lacks the <!-- cobs end case --> block")
	}
	if *update {
		doc = doc[:m[2]] + hexDump(wire) + doc[m[3]:]
		if err := os.WriteFile(docPath, []byte(doc), 0o644); err != nil {
			t.Fatal(err)
		}
		m = cobsEndCaseBlock.FindStringSubmatchIndex(doc)
	}
	var digits strings.Builder
	for _, line := range strings.Split(doc[m[2]:m[3]], "\n") {
		if k := strings.Index(line, ":"); k >= 0 {
			line = line[k+1:]
		}
		digits.WriteString(strings.ReplaceAll(line, " ", ""))
	}
	got, err := hex.DecodeString(digits.String())
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got, wire) {
		t.Fatalf("document:\n%s\nencoder:\n%s", hexDump(got), hexDump(wire))
	}
	// Independently of the encoder: the expected bytes from the rule.
	want := append([]byte{0x01, 0xFF}, in[1:]...)
	want = append(want, 0)
	if !bytes.Equal(wire, want) {
		t.Fatalf("encoder wrote\n%s\nwant 01 FF 01 … FE 00", hexDump(wire))
	}
	for _, form := range [][]byte{wire[:len(wire)-1], append(bytes.Clone(wire[:len(wire)-1]), 0x01)} {
		dec := make([]byte, len(form))
		k, err := DecodeCOBS(dec, form)
		if err != nil || !bytes.Equal(dec[:k], in) {
			t.Fatalf("decoding % x…: %v, %d bytes", form[:4], err, k)
		}
	}
}
