package protocol

// Consistent Overhead Byte Stuffing (Cheshire and Baker 1999, IEEE/ACM Trans.
// Networking 7(2):159–173). The encoded form contains no zero byte, so a zero
// on the wire always ends a frame. These functions handle one frame and do not
// deal with the delimiter; see Reader for the byte-stream side.

// COBSMaxLen is the largest COBS encoding of n input bytes (without the
// delimiter): one code byte per started block of 254 bytes, plus one.
func COBSMaxLen(n int) int { return n + n/254 + 1 }

// EncodeCOBS writes the COBS encoding of src into dst and returns its length.
// The result holds no zero byte and no delimiter. dst must not overlap src and
// must hold COBSMaxLen(len(src)) bytes, otherwise ErrShortBuffer is returned
// and dst is left partly written.
func EncodeCOBS(dst, src []byte) (int, error) {
	if len(dst) < COBSMaxLen(len(src)) {
		return 0, ErrShortBuffer
	}
	codeAt := 0 // where the code byte of the current block goes
	o := 1
	code := byte(1)
	for i, b := range src {
		if b != 0 {
			dst[o] = b
			o++
			code++
		}
		if b == 0 || code == 0xFF {
			dst[codeAt] = code
			code = 1
			codeAt = o
			// A full block at the very end needs no further code byte: the
			// decoder adds no zero after a 0xFF block.
			if b == 0 || i < len(src)-1 {
				o++
			}
		}
	}
	if codeAt < o { // false only when src ended with a full 254-byte block
		dst[codeAt] = code
	}
	return o, nil
}

// DecodeCOBS decodes one COBS-encoded frame src (without its delimiter) into
// dst and returns the decoded length. A zero byte in src, or a code byte that
// points past the end of src, gives an *Error of kind KindCOBS; a dst too
// small gives ErrShortBuffer. len(src) bytes always suffice for dst.
func DecodeCOBS(dst, src []byte) (int, error) {
	o := 0
	i := 0
	for i < len(src) {
		code := src[i]
		if code == 0 {
			return o, &Error{Kind: KindCOBS, Got: int64(i), Detail: "zero byte"}
		}
		i++
		end := i + int(code) - 1
		if end > len(src) {
			return o, &Error{Kind: KindCOBS, Got: int64(i - 1), Want: int64(code), Detail: "code past end"}
		}
		if o+end-i > len(dst) {
			return o, ErrShortBuffer
		}
		for ; i < end; i++ {
			b := src[i]
			if b == 0 {
				return o, &Error{Kind: KindCOBS, Got: int64(i), Detail: "zero byte"}
			}
			dst[o] = b
			o++
		}
		if code != 0xFF && i < len(src) {
			if o >= len(dst) {
				return o, ErrShortBuffer
			}
			dst[o] = 0
			o++
		}
	}
	return o, nil
}
