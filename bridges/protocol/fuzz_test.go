package protocol

import (
	"bytes"
	"testing"
)

// FuzzDecode feeds arbitrary bytes to Decode, both as a bare frame and as a
// byte stream through Reader. Neither may panic; a frame that decodes must
// re-encode to exactly the same bytes unless the sender put junk in fields
// the receiver ignores; and re-decoding the re-encoded frame gives the same
// message.
func FuzzDecode(f *testing.F) {
	for _, e := range exampleMessages() {
		b := make([]byte, MaxFrameLen)
		n, _ := Encode(b, &e.msg)
		f.Add(b[:n])
		w, _ := AppendWire(nil, make([]byte, MaxFrameLen), &e.msg)
		f.Add(w)
	}
	f.Add([]byte{})
	f.Add([]byte{0x02, 0x01, 0, 0, 0, 0, 0, 0, 0, 0})
	f.Fuzz(func(t *testing.T, data []byte) {
		var m Message
		if err := Decode(data, &m); err == nil {
			buf := make([]byte, MaxFrameLen)
			n, err := Encode(buf, &m)
			if err != nil {
				t.Fatalf("decoded message does not re-encode: %v (%+v)", err, m)
			}
			var again Message
			if err := Decode(buf[:n], &again); err != nil {
				t.Fatalf("re-encoded frame does not decode: %v", err)
			}
			if !sameMessage(&m, &again) {
				t.Fatalf("decode/encode/decode changed the message:\n%+v\n%+v", m, again)
			}
			if len(data) != n {
				t.Fatalf("decoded a %d-byte frame but the message encodes to %d", len(data), n)
			}
		}
		r := NewReader(bytes.NewReader(data))
		for range len(data) + 2 {
			if _, err := r.Next(); err != nil && !isProtocolError(err) {
				break
			}
		}
	})
}

func isProtocolError(err error) bool {
	_, ok := err.(*Error)
	return ok
}

// sameMessage compares bit patterns, so that NaN torques compare equal.
func sameMessage(a, b *Message) bool {
	ba, _ := AppendJSON(nil, a)
	bb, _ := AppendJSON(nil, b)
	return a.Type == b.Type && a.Seq == b.Seq && bytes.Equal(ba, bb)
}

// FuzzCOBS checks that any input survives EncodeCOBS/DecodeCOBS unchanged,
// that the encoding holds no zero and fits COBSMaxLen, and that decoding
// arbitrary bytes never panics or overruns.
func FuzzCOBS(f *testing.F) {
	f.Add([]byte{})
	f.Add([]byte{0})
	f.Add([]byte{0x11, 0x22, 0x00, 0x33})
	f.Add(seqBytes(0x01, 0xFF))
	f.Add(cat(seqBytes(0x02, 0xFF), []byte{0}))
	f.Add([]byte{0x05, 0x11, 0x22})
	f.Fuzz(func(t *testing.T, data []byte) {
		enc := make([]byte, COBSMaxLen(len(data)))
		n, err := EncodeCOBS(enc, data)
		if err != nil {
			t.Fatal(err)
		}
		if bytes.IndexByte(enc[:n], 0) >= 0 {
			t.Fatal("encoding holds a zero byte")
		}
		dec := make([]byte, len(data))
		k, err := DecodeCOBS(dec, enc[:n])
		if err != nil || !bytes.Equal(dec[:k], data) {
			t.Fatalf("round trip failed: %v", err)
		}
		out := make([]byte, len(data))
		if k, err := DecodeCOBS(out, data); err == nil && k > len(data) {
			t.Fatalf("decoded %d bytes from %d", k, len(data))
		}
	})
}
