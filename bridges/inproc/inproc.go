// Package inproc is the in-process link: a pair of bridges.Conn ends joined
// by buffered channels of protocol.Message values. Nothing is encoded, so a
// message crosses in a copy and no allocation; the built-in reference
// firmware and the fast scenario suites run over it. It keeps the semantics
// of the byte links (Recv deadline gives bridges.ErrTimeout, Close gives
// bridges.ErrClosed on both ends) so the loop cannot tell the difference.
//
// Faults (latency, dropped or corrupted frames) are injected by package hil,
// so they apply to every link, not only to this one.
package inproc

import (
	"sync"
	"sync/atomic"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
)

// DefaultCapacity is the number of messages each direction buffers. A sender
// that finds the buffer full loses the message, as a UART whose receive FIFO
// overflows would; 64 ticks is far more than a healthy lockstep or 1 kHz
// wall-clock loop ever has in flight.
const DefaultCapacity = 64

// Pair returns the two ends of a new in-process link with DefaultCapacity
// messages of buffer in each direction.
func Pair() (rig, firmware *End) { return PairSize(DefaultCapacity) }

// PairSize is Pair with a chosen buffer capacity per direction (at least 1).
func PairSize(capacity int) (rig, firmware *End) {
	if capacity < 1 {
		capacity = 1
	}
	a2b := make(chan protocol.Message, capacity)
	b2a := make(chan protocol.Message, capacity)
	shared := &link{closed: make(chan struct{})}
	rig = &End{link: shared, in: b2a, out: a2b, name: "rig"}
	firmware = &End{link: shared, in: a2b, out: b2a, name: "firmware"}
	return rig, firmware
}

// link is what both ends share: closing either end closes the link, just as
// pulling a cable ends it for both sides.
type link struct {
	once   sync.Once
	closed chan struct{}
}

// End is one end of an in-process link. It implements bridges.Conn. One
// goroutine may Send while another Recvs.
type End struct {
	*link
	in   <-chan protocol.Message
	out  chan<- protocol.Message
	name string

	timer *time.Timer // reused by Recv so a deadline does not allocate

	sent, received, dropped atomic.Uint64
}

var _ bridges.Conn = (*End)(nil)

// Send copies m into the peer's buffer. It never blocks: if the peer's
// buffer is full the message is lost and counted (see Dropped), like an
// overflowing receive FIFO. After Close it returns bridges.ErrClosed.
func (e *End) Send(m *protocol.Message) error {
	select {
	case <-e.closed:
		return bridges.ErrClosed
	default:
	}
	select {
	case e.out <- *m:
		e.sent.Add(1)
	default:
		e.dropped.Add(1)
	}
	return nil
}

// Recv waits for the next message until deadline. A zero deadline waits
// without limit. Messages already buffered are still delivered after the
// peer closed; then Recv returns bridges.ErrClosed. A deadline in the past
// still returns a message that is already waiting.
func (e *End) Recv(deadline time.Time, m *protocol.Message) error {
	select {
	case msg := <-e.in:
		*m = msg
		e.received.Add(1)
		return nil
	default:
	}
	select {
	case <-e.closed:
		return bridges.ErrClosed
	default:
	}
	var timeout <-chan time.Time
	if !deadline.IsZero() {
		d := time.Until(deadline)
		if d <= 0 {
			return bridges.ErrTimeout
		}
		if e.timer == nil {
			e.timer = time.NewTimer(d)
		} else {
			// Since Go 1.23 Reset discards a stale expiry, so no drain is needed.
			e.timer.Reset(d)
		}
		timeout = e.timer.C
	}
	select {
	case msg := <-e.in:
		if e.timer != nil {
			e.timer.Stop()
		}
		*m = msg
		e.received.Add(1)
		return nil
	case <-e.closed:
		if e.timer != nil {
			e.timer.Stop()
		}
		return bridges.ErrClosed
	case <-timeout:
		return bridges.ErrTimeout
	}
}

// Stats reports the messages that crossed this end. No bytes cross an
// in-process link and no frame can be malformed, so those counters stay 0.
func (e *End) Stats() bridges.Stats {
	return bridges.Stats{FramesSent: e.sent.Load(), FramesReceived: e.received.Load()}
}

// Dropped is the number of messages this end sent into a full buffer.
func (e *End) Dropped() uint64 { return e.dropped.Load() }

// Close ends the link for both ends. It is safe to call more than once.
func (e *End) Close() error {
	e.once.Do(func() { close(e.closed) })
	return nil
}

// String names the end, for logs.
func (e *End) String() string { return "inproc:" + e.name }
