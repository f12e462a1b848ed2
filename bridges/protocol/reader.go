package protocol

import "io"

// Reader splits a byte stream (a serial port, a pipe) into COBS frames
// delimited by zero bytes, and decodes them. After garbage, a truncated frame
// or an overlong run without a delimiter it reports one error and picks up at
// the next zero byte, so one bad stretch costs at most the frames it touched.
// Its buffers are fixed arrays: reading never allocates, and a peer that
// floods garbage cannot make it use more memory.
//
// A Reader is used by one goroutine at a time.
type Reader struct {
	r       io.Reader
	pending error // read error to return once the buffered bytes are used

	in         [4096]byte
	start, end int

	enc      [MaxWireLen]byte
	n        int  // bytes collected in enc for the current frame
	skipping bool // discarding an overlong run until the next zero

	frame   [MaxFrameLen]byte
	wireLen int
}

// NewReader returns a Reader of r.
func NewReader(r io.Reader) *Reader {
	return &Reader{r: r}
}

// Reset makes the Reader read from r, dropping any partial frame and any
// pending error (used after a reconnect).
func (r *Reader) Reset(src io.Reader) {
	r.r = src
	r.pending = nil
	r.start, r.end = 0, 0
	r.n, r.skipping = 0, false
}

// WireLen returns the number of encoded bytes (delimiter excluded) of the
// frame or rejected stretch that the last call to Next returned.
func (r *Reader) WireLen() int { return r.wireLen }

// Next returns the next frame with COBS removed, not yet checked by Decode.
// The slice is valid until the next call. A stretch that is not valid COBS or
// is longer than MaxWireLen gives an *Error (KindCOBS or KindTooLong) and
// the Reader is ready for the next frame. An error from the underlying
// reader is returned after the bytes read before it have been used; Next then
// keeps returning it.
func (r *Reader) Next() ([]byte, error) {
	idle := 0
	for {
		for r.start < r.end {
			b := r.in[r.start]
			r.start++
			if r.skipping {
				r.skipping = b != 0
				continue
			}
			if b != 0 {
				if r.n == len(r.enc) {
					r.wireLen = r.n + 1
					r.skipping, r.n = true, 0
					return nil, &Error{Kind: KindTooLong, Got: int64(r.wireLen), Want: MaxWireLen,
						Detail: "no delimiter"}
				}
				r.enc[r.n] = b
				r.n++
				continue
			}
			// Delimiter: a frame ends here. Empty frames are ignored.
			if r.n == 0 {
				continue
			}
			enc := r.enc[:r.n]
			r.wireLen, r.n = len(enc), 0
			k, err := DecodeCOBS(r.frame[:], enc)
			if err != nil {
				if err == ErrShortBuffer {
					return nil, &Error{Kind: KindTooLong, Got: int64(len(enc)), Want: MaxFrameLen, Detail: "decoded"}
				}
				return nil, err
			}
			return r.frame[:k], nil
		}
		if r.pending != nil {
			return nil, r.pending
		}
		n, err := r.r.Read(r.in[:])
		r.start, r.end = 0, n
		if err != nil {
			r.pending = err
		}
		if n == 0 && err == nil {
			idle++
			if idle > 100 {
				r.pending = io.ErrNoProgress
			}
		} else {
			idle = 0
		}
	}
}

// ReadMessage reads the next frame and decodes it into m. Errors are those of
// Next and Decode.
func (r *Reader) ReadMessage(m *Message) error {
	f, err := r.Next()
	if err != nil {
		return err
	}
	return Decode(f, m)
}

// AppendWire encodes m as a frame, COBS-encodes it and appends it with its
// zero delimiter to dst, for writing to a byte stream. scratch must hold
// MaxFrameLen bytes; with enough capacity in dst nothing is allocated.
func AppendWire(dst, scratch []byte, m *Message) ([]byte, error) {
	n, err := Encode(scratch, m)
	if err != nil {
		return dst, err
	}
	need := COBSMaxLen(n) + 1
	if cap(dst)-len(dst) < need {
		grown := make([]byte, len(dst), len(dst)+need)
		copy(grown, dst)
		dst = grown
	}
	out := dst[len(dst) : len(dst)+need]
	k, err := EncodeCOBS(out, scratch[:n])
	if err != nil {
		return dst, err
	}
	out[k] = 0
	return dst[:len(dst)+k+1], nil
}
