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
// that finds the buffer full discards the oldest waiting message to make
// room, as the serial link does when its reader falls behind: for a control
// link the newest state or command is the one that matters. 64 ticks is far
// more than a healthy lockstep or 1 kHz wall-clock loop has in flight.
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
	rig.peer, firmware.peer = firmware, rig
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
	in   chan protocol.Message
	out  chan protocol.Message // the peer's in
	peer *End
	name string

	timer *time.Timer // reused by Recv so a deadline does not allocate

	sent, received atomic.Uint64
	dropped        atomic.Uint64 // messages discarded from this end's buffer
}

var _ bridges.Conn = (*End)(nil)

// Send copies m into the peer's buffer. It never blocks: if the peer's
// buffer is full, the oldest message waiting there is discarded to make room
// and counted in the peer's Stats().Dropped. After Close it returns
// bridges.ErrClosed.
func (e *End) Send(m *protocol.Message) error {
	select {
	case <-e.closed:
		return bridges.ErrClosed
	default:
	}
	for {
		select {
		case e.out <- *m:
			e.sent.Add(1)
			return nil
		default:
		}
		// Full: take the oldest out of the peer's buffer. The peer may have
		// emptied a slot meanwhile, so only count what was really taken.
		select {
		case <-e.out:
			e.peer.dropped.Add(1)
		default:
		}
	}
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

// Stats reports the messages that crossed this end and the ones discarded
// from its buffer because it fell behind (Dropped). No bytes cross an
// in-process link and no frame can be malformed, so those counters stay 0.
func (e *End) Stats() bridges.Stats {
	return bridges.Stats{FramesSent: e.sent.Load(), FramesReceived: e.received.Load(), Dropped: e.dropped.Load()}
}

// Close ends the link for both ends. It is safe to call more than once.
func (e *End) Close() error {
	e.once.Do(func() { close(e.closed) })
	return nil
}

// String names the end, for logs.
func (e *End) String() string { return "inproc:" + e.name }
