package protocol

import (
	"bytes"
	"testing"
)

func reportFrames(b *testing.B) {
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "frames/s")
}

func BenchmarkEncodeState(b *testing.B) {
	m := exampleMessages()[2].msg
	buf := make([]byte, MaxFrameLen)
	b.ReportAllocs()
	for b.Loop() {
		m.Seq++
		if _, err := Encode(buf, &m); err != nil {
			b.Fatal(err)
		}
	}
	reportFrames(b)
}

func BenchmarkDecodeState(b *testing.B) {
	m := exampleMessages()[2].msg
	buf := make([]byte, MaxFrameLen)
	n, _ := Encode(buf, &m)
	var out Message
	b.ReportAllocs()
	for b.Loop() {
		if err := Decode(buf[:n], &out); err != nil {
			b.Fatal(err)
		}
	}
	reportFrames(b)
}

func BenchmarkDecodeConfigUnchanged(b *testing.B) {
	m := exampleMessages()[1].msg
	buf := make([]byte, MaxFrameLen)
	n, _ := Encode(buf, &m)
	var out Message
	_ = Decode(buf[:n], &out) // first decode allocates the names
	b.ReportAllocs()
	for b.Loop() {
		if err := Decode(buf[:n], &out); err != nil {
			b.Fatal(err)
		}
	}
	reportFrames(b)
}

// BenchmarkCOBS encodes and decodes one state frame per iteration.
func BenchmarkCOBS(b *testing.B) {
	m := exampleMessages()[2].msg
	frame := make([]byte, MaxFrameLen)
	n, _ := Encode(frame, &m)
	enc := make([]byte, MaxWireLen)
	dec := make([]byte, MaxFrameLen)
	b.ReportAllocs()
	b.SetBytes(int64(n))
	for b.Loop() {
		k, err := EncodeCOBS(enc, frame[:n])
		if err != nil {
			b.Fatal(err)
		}
		if _, err := DecodeCOBS(dec, enc[:k]); err != nil {
			b.Fatal(err)
		}
	}
	reportFrames(b)
}

// BenchmarkReaderState measures the stream side: COBS frames split from a
// byte stream and decoded, 64 states per refill.
func BenchmarkReaderState(b *testing.B) {
	m := exampleMessages()[2].msg
	var stream []byte
	scratch := make([]byte, MaxFrameLen)
	for range 64 {
		stream, _ = AppendWire(stream, scratch, &m)
	}
	src := bytes.NewReader(stream)
	r := NewReader(src)
	var out Message
	b.ReportAllocs()
	for i := 0; b.Loop(); i++ {
		if i%64 == 0 {
			src.Reset(stream)
		}
		if err := r.ReadMessage(&out); err != nil {
			b.Fatal(err)
		}
	}
	reportFrames(b)
}

func BenchmarkAppendJSONState(b *testing.B) {
	m := exampleMessages()[2].msg
	buf := make([]byte, 0, 512)
	b.ReportAllocs()
	for b.Loop() {
		buf, _ = AppendJSON(buf[:0], &m)
	}
	reportFrames(b)
}
