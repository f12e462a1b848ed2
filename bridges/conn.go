// Package bridges holds the links between the rig and a controller: the wire
// protocol (package protocol) and one package per transport (serial, mqtt,
// inproc, and the embedded broker). A bridge only moves bytes and messages;
// it knows no physics. Every transport presents the same Conn interface to
// the loop in package hil.
package bridges

import (
	"errors"
	"time"

	"gaitrig/bridges/protocol"
)

// Conn is a message-level, full-duplex link to one controller.
//
// Send and Recv may be called from different goroutines (one sender, one
// receiver). Neither allocates in steady state.
type Conn interface {
	// Send encodes and transmits one message.
	Send(m *protocol.Message) error
	// Recv blocks until a whole valid message arrives, the deadline passes
	// (ErrTimeout) or the link fails. A frame that fails its CRC or does not
	// decode is reported as a *FrameError and the link stays usable.
	Recv(deadline time.Time, m *protocol.Message) error
	// Stats returns counters of the link so far. The loop reads them once
	// at the end of a run into hil.Result.Transport: they count what the
	// transport itself did (bytes, frames it dropped because the reader fell
	// behind, reconnects), which the loop cannot see from messages.
	Stats() Stats
	// Close releases the link. Recv then returns ErrClosed.
	Close() error
}

// Stats counts what crossed a link, for the run summary and alarms.
type Stats struct {
	FramesSent     uint64 // whole frames handed to the transport
	FramesReceived uint64 // frames that passed their checks and decoded
	FrameErrors    uint64 // bad CRC, bad COBS, wrong type, truncated
	BytesSent      uint64 // bytes written, delimiters and framing included
	BytesReceived  uint64 // bytes read, garbage included
	Reconnects     uint64 // times the link came back after it was lost
	Dropped        uint64 // valid frames discarded because the receiver fell behind (serial and inproc drop the oldest, mqtt the newest)
}

// ErrTimeout is returned by Recv when the deadline passes with no message.
var ErrTimeout = errors.New("bridges: receive deadline passed")

// ErrClosed is returned after Close, or when the peer closed the link.
var ErrClosed = errors.New("bridges: link closed")

// ErrDisconnected is wrapped by errors from links that lost their peer and
// are trying to get it back (serial unplug). Send returns it at once while the
// link is down; Recv returns it once when the link drops, and wrapped together
// with ErrTimeout for deadlines that pass while it is still down.
var ErrDisconnected = errors.New("bridges: link down")

// ErrSendBusy is wrapped by a Send that refused its message because the
// frames queued before it have not left yet (the peer is not reading, or
// the host has not run the link's writer). The message was not sent; the
// link stays usable and a later Send may succeed. A firmware drops such an
// answer as a board drops a frame its full UART buffer cannot take (the
// rig's resend asks again); nothing is gained by giving up on the link.
var ErrSendBusy = errors.New("bridges: send queue full")

// FrameError reports one rejected incoming frame. The link stays usable.
type FrameError struct {
	Reason string // short plain description, e.g. "bad CRC: got 0x1234, computed 0xBEEF"
	Bytes  int    // length of the rejected frame
	// Err is the decoder's refusal (a *protocol.Error, or the JSON parser's
	// error) when the frame did not decode, so that errors.Is(err,
	// protocol.ErrVersion) tells a peer of another protocol version from
	// line noise; nil for rejections of a transport's own (a frame on the
	// wrong topic, a receive queue that overflowed).
	Err error
}

// Error says why the frame was rejected, in words a person reading the
// alarm understands.
func (e *FrameError) Error() string { return "bridges: rejected frame: " + e.Reason }

// Unwrap returns the decoder's error, if any.
func (e *FrameError) Unwrap() error { return e.Err }

// LinkEventKind says what changed in a link's health.
type LinkEventKind string

// Link event kinds. The values are the words the events are logged with.
const (
	// LinkDisconnected: the link lost its peer (port unplugged, broker
	// gone) and is trying to get it back; LinkEvent.Err holds the cause.
	LinkDisconnected LinkEventKind = "disconnected"
	// LinkReconnected: the link is back; LinkEvent.Gap is how long it was
	// down.
	LinkReconnected LinkEventKind = "reconnected"
)

// LinkEvent reports a change of link health that the loop turns into an
// alarm (unplug, reconnect with the gap, broker lost).
type LinkEvent struct {
	Kind LinkEventKind // LinkDisconnected or LinkReconnected
	Gap  time.Duration // for LinkReconnected: how long the link was down
	Err  error         // for LinkDisconnected: the cause
}

// Notifier is implemented by links that can report LinkEvents. The loop
// drains Events() without blocking.
type Notifier interface {
	// Events returns the channel the link reports its health changes on.
	Events() <-chan LinkEvent
}
