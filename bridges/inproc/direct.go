package inproc

import (
	"sync"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
)

// Responder is firmware logic that answers the rig synchronously: the
// built-in reference firmware (reference.Firmware) is one.
type Responder interface {
	// Greeting is the firmware's first message.
	Greeting() *protocol.Message
	// Handle answers one message from the rig: answer is nil when there is
	// none, end is true when the session is over.
	Handle(in *protocol.Message) (answer *protocol.Message, end bool, err error)
}

// directQueue is how many answers may wait for the rig's Recv. One is the
// usual number in lockstep; a few more cover a resent state.
const directQueue = 16

// Direct is the rig's end of a link whose firmware runs inside Send: each
// message the rig sends is handed to the Responder at once, and its answer
// waits for the rig's next Recv. No goroutine stands between rig and
// firmware, so a lockstep tick costs no hand-over between threads; that is
// the fast path for suites run against the built-in firmware. The answer
// comes back with zero latency, so it is not a model of a wall-clock link:
// use Pair there.
type Direct struct {
	mu       sync.Mutex
	fw       Responder
	queue    [directQueue]protocol.Message
	head, n  int
	ended    bool  // the firmware ended the session
	endErr   error // why, when not a normal end
	closed   bool
	closedCh chan struct{} // closed by Close, wakes a waiting Recv
	timer    *time.Timer   // reused by a waiting Recv
	sent     uint64
	received uint64
	dropped  uint64
}

var _ bridges.Conn = (*Direct)(nil)

// NewDirect returns the rig's end of a direct link to fw, with fw's greeting
// already waiting to be received.
func NewDirect(fw Responder) *Direct {
	d := &Direct{fw: fw, closedCh: make(chan struct{})}
	d.push(fw.Greeting())
	return d
}

// push queues a copy of m for Recv; when the queue is full the oldest answer
// is discarded and counted, as Pair does.
func (d *Direct) push(m *protocol.Message) {
	if d.n == directQueue {
		d.head = (d.head + 1) % directQueue
		d.n--
		d.dropped++
	}
	d.queue[(d.head+d.n)%directQueue] = *m
	d.n++
}

// Send hands m to the firmware and queues its answer. After Close it returns
// bridges.ErrClosed; after the firmware ended the session, messages are
// dropped as a board that stopped listening would.
func (d *Direct) Send(m *protocol.Message) error {
	d.mu.Lock()
	defer d.mu.Unlock()
	if d.closed {
		return bridges.ErrClosed
	}
	d.sent++
	if d.ended {
		return nil
	}
	answer, end, err := d.fw.Handle(m)
	if answer != nil {
		d.push(answer)
	}
	if end {
		d.ended, d.endErr = true, err
	}
	return nil
}

// Recv returns the oldest waiting answer. With none waiting it waits until
// the deadline (nothing can arrive meanwhile: the firmware only speaks when
// spoken to) and returns bridges.ErrTimeout, or returns bridges.ErrClosed as
// soon as the link is closed; a zero deadline returns the timeout at once
// rather than wait for ever.
func (d *Direct) Recv(deadline time.Time, m *protocol.Message) error {
	d.mu.Lock()
	if d.n > 0 {
		*m = d.queue[d.head]
		d.head = (d.head + 1) % directQueue
		d.n--
		d.received++
		d.mu.Unlock()
		return nil
	}
	closed := d.closed
	d.mu.Unlock()
	if closed {
		return bridges.ErrClosed
	}
	w := time.Until(deadline)
	if deadline.IsZero() || w <= 0 {
		return bridges.ErrTimeout
	}
	// Only one goroutine receives, so the timer needs no lock.
	if d.timer == nil {
		d.timer = time.NewTimer(w)
	} else {
		d.timer.Reset(w)
	}
	select {
	case <-d.timer.C:
		return bridges.ErrTimeout
	case <-d.closedCh:
		d.timer.Stop()
		return bridges.ErrClosed
	}
}

// Stats reports the messages that crossed the link and the answers
// discarded because the rig did not collect them.
func (d *Direct) Stats() bridges.Stats {
	d.mu.Lock()
	defer d.mu.Unlock()
	return bridges.Stats{FramesSent: d.sent, FramesReceived: d.received, Dropped: d.dropped}
}

// Ended reports whether the firmware ended the session, and its reason
// (nil after a normal end).
func (d *Direct) Ended() (bool, error) {
	d.mu.Lock()
	defer d.mu.Unlock()
	return d.ended, d.endErr
}

// Close ends the link. It is safe to call more than once.
func (d *Direct) Close() error {
	d.mu.Lock()
	defer d.mu.Unlock()
	if !d.closed {
		d.closed = true
		close(d.closedCh)
	}
	return nil
}
