package protocol

import (
	"errors"
	"fmt"
)

// Kind classifies why a frame was refused. Every *Error unwraps to the
// sentinel of its kind, so callers can test with errors.Is(err, ErrBadCRC).
type Kind uint8

// Kinds of refusal, in the order the decoder checks them (docs/protocol.md
// section 5).
const (
	KindCOBS          Kind = iota + 1 // byte stuffing broken (zero byte, code past end)
	KindTooLong                       // more bytes than any frame may have
	KindTruncated                     // fewer bytes than the header or the length field promise
	KindLength                        // length field or payload size wrong for the type
	KindBadCRC                        // CRC does not match
	KindVersion                       // peer speaks another protocol version
	KindUnknownType                   // type byte not in the protocol
	KindTooManyJoints                 // joint or actuator count beyond MaxJoints (or zero)
	KindStringTooLong                 // text longer than MaxNameLen, or holding a zero byte
	KindBadField                      // any other field outside its allowed values
)

// Sentinel errors, one per Kind, for errors.Is.
var (
	ErrCOBS          = errors.New("bad COBS")
	ErrTooLong       = errors.New("frame too long")
	ErrTruncated     = errors.New("truncated frame")
	ErrLength        = errors.New("length mismatch")
	ErrBadCRC        = errors.New("bad CRC")
	ErrVersion       = errors.New("wrong protocol version")
	ErrUnknownType   = errors.New("unknown message type")
	ErrTooManyJoints = errors.New("bad joint count")
	ErrStringTooLong = errors.New("string too long")
	ErrBadField      = errors.New("bad field")
)

// ErrShortBuffer is returned when a destination buffer cannot hold the result.
// It is a programming error, not bad input from a peer.
var ErrShortBuffer = errors.New("protocol: destination buffer too small")

var kindSentinel = [...]error{
	KindCOBS:          ErrCOBS,
	KindTooLong:       ErrTooLong,
	KindTruncated:     ErrTruncated,
	KindLength:        ErrLength,
	KindBadCRC:        ErrBadCRC,
	KindVersion:       ErrVersion,
	KindUnknownType:   ErrUnknownType,
	KindTooManyJoints: ErrTooManyJoints,
	KindStringTooLong: ErrStringTooLong,
	KindBadField:      ErrBadField,
}

// Error is a refused frame or message, with the numbers a person needs to see
// what went wrong. The text is built only when Error() is called.
type Error struct {
	Kind  Kind   // which check refused it; Unwrap gives the matching sentinel
	Type  Type   // message type, when known (0 otherwise)
	Field string // field name, for field errors
	Got   int64  // the value found (meaning depends on Kind)
	Want  int64  // the value expected or the limit
	// WantMin is, for KindVersion, the oldest version the receiver speaks
	// when it speaks a range WantMin … Want; 0 when it speaks Want only.
	WantMin int64
	Detail  string // short extra detail
}

// Unwrap returns the sentinel error of e's Kind.
func (e *Error) Unwrap() error {
	if int(e.Kind) < len(kindSentinel) && kindSentinel[e.Kind] != nil {
		return kindSentinel[e.Kind]
	}
	return nil
}

// Error describes the refusal in plain words, naming the values involved.
func (e *Error) Error() string {
	switch e.Kind {
	case KindCOBS:
		if e.Detail == "code past end" {
			return fmt.Sprintf("bad COBS: code byte 0x%02X at offset %d runs past the end of the frame", e.Want, e.Got)
		}
		return fmt.Sprintf("bad COBS: zero byte inside the encoded frame at offset %d", e.Got)
	case KindTooLong:
		switch e.Detail {
		case "no delimiter":
			return fmt.Sprintf("frame too long: %d bytes without a zero delimiter, the limit is %d; skipping to the next delimiter", e.Got, e.Want)
		case "decoded":
			return fmt.Sprintf("frame too long: %d encoded bytes decode to more than %d", e.Got, e.Want)
		}
		return fmt.Sprintf("frame too long: %d bytes, the limit is %d", e.Got, e.Want)
	case KindTruncated:
		if e.Detail != "" {
			return fmt.Sprintf("truncated %s frame: %s", typeLabel(e.Type), e.Detail)
		}
		return fmt.Sprintf("truncated frame: %d bytes, a frame has at least %d (header and CRC)", e.Got, e.Want)
	case KindLength:
		if e.Detail != "" {
			return fmt.Sprintf("length mismatch in %s frame: %s", typeLabel(e.Type), e.Detail)
		}
		return fmt.Sprintf("length mismatch: a %s frame carries %d payload bytes, this one says %d", typeLabel(e.Type), e.Want, e.Got)
	case KindBadCRC:
		return fmt.Sprintf("bad CRC: got 0x%04X, computed 0x%04X", e.Got, e.Want)
	case KindVersion:
		if e.WantMin > 0 && e.WantMin < e.Want {
			return fmt.Sprintf("wrong protocol version: %s speaks version %d, this side speaks versions %d to %d", orDefault(e.Detail, "the frame"), e.Got, e.WantMin, e.Want)
		}
		return fmt.Sprintf("wrong protocol version: %s speaks version %d, this side speaks version %d", orDefault(e.Detail, "the frame"), e.Got, e.Want)
	case KindUnknownType:
		return fmt.Sprintf("unknown message type 0x%02X", e.Got)
	case KindTooManyJoints:
		return fmt.Sprintf("%s: %s %d is outside 1…%d", typeLabel(e.Type), e.Field, e.Got, e.Want)
	case KindStringTooLong:
		if e.Detail != "" {
			return fmt.Sprintf("%s: string field %s: %s", typeLabel(e.Type), e.Field, e.Detail)
		}
		return fmt.Sprintf("%s: string field %s is %d bytes, at most %d fit", typeLabel(e.Type), e.Field, e.Got, e.Want)
	case KindBadField:
		return fmt.Sprintf("%s: field %s is %d: %s", typeLabel(e.Type), e.Field, e.Got, e.Detail)
	}
	return fmt.Sprintf("protocol error (kind %d)", e.Kind)
}

func orDefault(s, d string) string {
	if s == "" {
		return d
	}
	return s
}

func typeLabel(t Type) string {
	if n := t.Name(); n != "" {
		return n
	}
	if t == 0 {
		return "message"
	}
	return fmt.Sprintf("type 0x%02X", uint8(t))
}
