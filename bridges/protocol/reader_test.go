package protocol

import (
	"bytes"
	"errors"
	"io"
	"math/rand/v2"
	"testing"
)

func wire(t *testing.T, msgs ...Message) []byte {
	t.Helper()
	var out []byte
	scratch := make([]byte, MaxFrameLen)
	for i := range msgs {
		var err error
		out, err = AppendWire(out, scratch, &msgs[i])
		if err != nil {
			t.Fatal(err)
		}
	}
	return out
}

// oneByteReader hands out one byte per Read, the worst case for a splitter.
type oneByteReader struct{ r io.Reader }

func (o oneByteReader) Read(p []byte) (int, error) { return o.r.Read(p[:min(1, len(p))]) }

func TestReaderStream(t *testing.T) {
	ex := exampleMessages()
	var msgs []Message
	for _, e := range ex {
		msgs = append(msgs, e.msg)
	}
	stream := wire(t, msgs...)
	for _, chunked := range []bool{false, true} {
		var src io.Reader = bytes.NewReader(stream)
		if chunked {
			src = oneByteReader{src}
		}
		r := NewReader(src)
		for i := range msgs {
			var m Message
			if err := r.ReadMessage(&m); err != nil {
				t.Fatalf("chunked=%v message %d: %v", chunked, i, err)
			}
			if m != msgs[i] {
				t.Fatalf("chunked=%v message %d: got %+v", chunked, i, m)
			}
		}
		if _, err := r.Next(); err != io.EOF {
			t.Fatalf("chunked=%v: after the last frame err = %v, want io.EOF", chunked, err)
		}
	}
}

func TestReaderResync(t *testing.T) {
	ex := exampleMessages()
	state, command := ex[2].msg, ex[3].msg
	rng := rand.New(rand.NewPCG(5, 6))
	tests := []struct {
		name    string
		garbage func() []byte
	}{
		{"random bytes with zeros", func() []byte {
			b := make([]byte, 200)
			for i := range b {
				b[i] = byte(rng.Uint32())
			}
			return b
		}},
		{"random non-zero bytes", func() []byte {
			b := make([]byte, 100)
			for i := range b {
				b[i] = byte(1 + rng.IntN(255))
			}
			return b
		}},
		{"overlong run", func() []byte { return bytes.Repeat([]byte{0x55}, 2000) }},
		{"half a frame", func() []byte { w := wire(t, state); return w[:len(w)/2] }},
		{"lone delimiters", func() []byte { return []byte{0, 0, 0} }},
	}
	for _, tc := range tests {
		var stream []byte
		for range 20 {
			stream = append(stream, tc.garbage()...)
			stream = append(stream, 0) // a sender's leading delimiter
			stream = append(stream, wire(t, state, command)...)
		}
		r := NewReader(bytes.NewReader(stream))
		good, bad := 0, 0
		for {
			var m Message
			err := r.ReadMessage(&m)
			if err == io.EOF {
				break
			}
			if err != nil {
				var pe *Error
				if !errors.As(err, &pe) {
					t.Fatalf("%s: non-protocol error %v", tc.name, err)
				}
				bad++
				continue
			}
			if m != state && m != command {
				t.Fatalf("%s: decoded a message that was never sent: %+v", tc.name, m)
			}
			good++
		}
		if good != 40 {
			t.Errorf("%s: %d good messages, want all 40 (bad %d)", tc.name, good, bad)
		}
		if tc.name == "lone delimiters" && bad != 0 {
			t.Errorf("empty frames must be ignored silently, got %d errors", bad)
		}
		if tc.name == "overlong run" && bad != 20 {
			t.Errorf("overlong run: %d errors, want one per run (20)", bad)
		}
	}
}

func TestReaderOverlongError(t *testing.T) {
	r := NewReader(bytes.NewReader(bytes.Repeat([]byte{7}, MaxWireLen+10)))
	_, err := r.Next()
	if !errors.Is(err, ErrTooLong) {
		t.Fatalf("err = %v, want ErrTooLong", err)
	}
	if r.WireLen() != MaxWireLen+1 {
		t.Errorf("WireLen = %d, want %d", r.WireLen(), MaxWireLen+1)
	}
	if _, err := r.Next(); err != io.EOF {
		t.Errorf("then err = %v, want io.EOF", err)
	}
}

type stuckReader struct{}

func (stuckReader) Read([]byte) (int, error) { return 0, nil }

func TestReaderNoProgress(t *testing.T) {
	if _, err := NewReader(stuckReader{}).Next(); err != io.ErrNoProgress {
		t.Fatalf("err = %v, want io.ErrNoProgress", err)
	}
}

func TestReaderReset(t *testing.T) {
	w := wire(t, exampleMessages()[4].msg)
	r := NewReader(bytes.NewReader(w[:5])) // half a heartbeat, then the line drops
	if _, err := r.Next(); err != io.EOF {
		t.Fatalf("err = %v", err)
	}
	r.Reset(bytes.NewReader(w))
	var m Message
	if err := r.ReadMessage(&m); err != nil || m.Type != TypeHeartbeat {
		t.Fatalf("after Reset: %v %+v", err, m)
	}
}
