// Package serial is the gaitrig link over a serial line: a UART, a USB CDC
// port or a pseudo-terminal. Frames of package protocol travel COBS-encoded
// with a zero delimiter (docs/protocol.md section 4).
//
// Open opens a port by path with go.bug.st/serial and keeps it: when the
// port disappears (a USB cable pulled, the far end of a pty closed) the link
// reports a bridges.LinkDisconnected event, keeps trying to open the same path every
// ReconnectWait, and reports bridges.LinkReconnected with the length of the gap when it
// is back. NewConn runs the same link over any byte stream that is already
// open (the master end of a pty held by a test or a firmware process); such a
// link ends when its stream fails.
//
// One goroutine reads and decodes, one writes. Received messages wait in a
// fixed queue; if the loop does not keep up (a firmware that floods), the
// oldest entries are dropped and counted in Stats().Dropped, so memory stays
// bounded. Sent frames go through a small pool of buffers; if the peer stops
// reading and the pool runs dry, Send fails at once with ErrSendQueueFull
// instead of blocking the loop. In steady state neither direction allocates.
package serial

import (
	"errors"
	"fmt"
	"io"
	"sync"
	"sync/atomic"
	"time"

	bugserial "go.bug.st/serial"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
)

// Config says which port to open and how to behave when it goes away.
type Config struct {
	// Port is the device path, e.g. /dev/ttyACM0 or a pty follower path.
	Port string
	// Baud is the line rate in bit/s; 0 means 115200. A pty ignores it.
	Baud int
	// ReconnectWait is the pause between attempts to reopen the port after it
	// went away; 0 means 50 ms.
	ReconnectWait time.Duration
	// OpenTimeout is how long Open keeps trying when the port is not there
	// yet (a board still enumerating); 0 means a single attempt.
	OpenTimeout time.Duration
	// QueueLen is the number of received messages (and frame errors) held
	// for Recv; 0 means 64.
	QueueLen int
	// SendQueueLen is the number of frames that may wait for the port; 0
	// means 16.
	SendQueueLen int
	// Pace holds every frame written for the time its bytes take on a
	// UART at Baud (protocol.UARTBitsPerByte bits per byte), one frame
	// after the other as on a real line. A pty ignores the baud rate and
	// delivers at once; pacing makes a bench test over a pty show the
	// timing a board's UART will (docs/protocol.md, wire-time budget).
	Pace bool
}

func (c *Config) withDefaults() Config {
	d := *c
	if d.Baud == 0 {
		d.Baud = 115200
	}
	if d.ReconnectWait <= 0 {
		d.ReconnectWait = 50 * time.Millisecond
	}
	if d.QueueLen <= 0 {
		d.QueueLen = 64
	}
	if d.SendQueueLen <= 0 {
		d.SendQueueLen = 16
	}
	return d
}

// ErrSendQueueFull is returned by Send when the frames already queued have
// not been written, because the peer stopped reading or the port stalled.
// It wraps bridges.ErrSendBusy: the link stays usable.
var ErrSendQueueFull error = sendQueueFullError{}

type sendQueueFullError struct{}

func (sendQueueFullError) Error() string {
	return "serial: send queue full: the port has not taken the frames already queued (peer not reading?)"
}

func (sendQueueFullError) Unwrap() error { return bridges.ErrSendBusy }

// rxItem is one entry of the receive queue: a message or an error.
type rxItem struct {
	msg protocol.Message
	err error
}

type txBuf struct {
	b []byte // cap MaxWireLen+1
}

type portBox struct{ p io.ReadWriteCloser }

// Conn is a serial link. It implements bridges.Conn and bridges.Notifier.
type Conn struct {
	cfg       Config
	name      string // port path or stream name, for error texts
	reconnect bool   // Open: reopen the path after an unplug

	port   atomic.Pointer[portBox] // nil while down
	up     atomic.Bool
	closed chan struct{}
	once   sync.Once

	rx     chan rxItem
	events chan bridges.LinkEvent

	free, full chan *txBuf
	scratch    [protocol.MaxFrameLen]byte // Send side only (one sender)
	timer      *time.Timer                // Recv side only (one receiver)
	paceTimer  *time.Timer                // write loop only, with Config.Pace

	counts   bridges.Counters
	writeErr atomic.Pointer[error]
}

// Open opens cfg.Port and starts the link. If the port is missing it keeps
// trying for cfg.OpenTimeout; the error then names the port and the cause.
func Open(cfg Config) (*Conn, error) {
	cfg = cfg.withDefaults()
	if cfg.Port == "" {
		return nil, errors.New("serial: no port given")
	}
	start := time.Now()
	var p bugserial.Port
	var err error
	for {
		p, err = openPort(&cfg)
		if err == nil || time.Since(start) >= cfg.OpenTimeout {
			break
		}
		time.Sleep(cfg.ReconnectWait)
	}
	if err != nil {
		return nil, fmt.Errorf("serial: opening %s: %w", cfg.Port, err)
	}
	c := newConn(cfg, cfg.Port, true)
	c.start(p)
	return c, nil
}

func openPort(cfg *Config) (bugserial.Port, error) {
	return bugserial.Open(cfg.Port, &bugserial.Mode{BaudRate: cfg.Baud, DataBits: 8, Parity: bugserial.NoParity, StopBits: bugserial.OneStopBit})
}

// NewConn runs the link over a byte stream that is already open, such as the
// master end of a pty (see Pty). name labels it in errors. The link does not
// reconnect: when rw fails, Recv reports the disconnect once and then
// ErrClosed. Closing the Conn closes rw.
func NewConn(rw io.ReadWriteCloser, name string, cfg Config) *Conn {
	cfg = cfg.withDefaults()
	c := newConn(cfg, name, false)
	c.start(rw)
	return c
}

func newConn(cfg Config, name string, reconnect bool) *Conn {
	c := &Conn{
		cfg:       cfg,
		name:      name,
		reconnect: reconnect,
		closed:    make(chan struct{}),
		rx:        make(chan rxItem, cfg.QueueLen),
		events:    make(chan bridges.LinkEvent, 32),
		free:      make(chan *txBuf, cfg.SendQueueLen),
		full:      make(chan *txBuf, cfg.SendQueueLen),
		timer:     time.NewTimer(time.Hour),
	}
	c.timer.Stop()
	for range cfg.SendQueueLen {
		c.free <- &txBuf{b: make([]byte, 0, protocol.MaxWireLen+1)}
	}
	return c
}

func (c *Conn) start(p io.ReadWriteCloser) {
	c.attach(p)
	go c.readLoop(p)
	go c.writeLoop()
}

// attach makes p the current port. The leading delimiter flushes whatever
// half frame the peer may hold from before (docs/protocol.md section 4).
func (c *Conn) attach(p io.ReadWriteCloser) {
	if _, err := p.Write([]byte{0}); err == nil {
		c.counts.BytesSent.Add(1)
	}
	c.port.Store(&portBox{p: p})
	c.up.Store(true)
}

// countingReader counts bytes read from the current port.
type countingReader struct {
	c *Conn
	p io.Reader
}

func (r *countingReader) Read(b []byte) (int, error) {
	n, err := r.p.Read(b)
	r.c.counts.BytesReceived.Add(uint64(n))
	return n, err
}

func (c *Conn) readLoop(p io.ReadWriteCloser) {
	cr := &countingReader{c: c, p: p}
	rd := protocol.NewReader(cr)
	var item rxItem // decoded in place; strings are reused when unchanged
	for {
		frame, err := rd.Next()
		if err == nil {
			if err = protocol.Decode(frame, &item.msg); err == nil {
				c.counts.FramesReceived.Add(1)
				item.err = nil
				c.push(&item)
				continue
			}
		}
		var pe *protocol.Error
		if errors.As(err, &pe) {
			c.counts.FrameErrors.Add(1)
			n := rd.WireLen()
			c.pushErr(&bridges.FrameError{Reason: pe.Error(), Bytes: n, Err: pe})
			continue
		}
		// The stream failed: unplugged, hung up or closed by us.
		c.up.Store(false)
		c.port.Store(nil)
		_ = p.Close()
		if c.isClosed() {
			return
		}
		down := time.Now()
		cause := fmt.Errorf("serial: %s went away (unplugged, or the other end closed): %w", c.name, err)
		c.event(bridges.LinkEvent{Kind: bridges.LinkDisconnected, Err: cause})
		c.pushErr(fmt.Errorf("%w: %s went away (unplugged, or the other end closed): %v", bridges.ErrDisconnected, c.name, err))
		if !c.reconnect {
			c.Close()
			return
		}
		np, ok := c.reopen()
		if !ok {
			return
		}
		p = np
		cr.p = p
		rd.Reset(cr)
		c.attach(p)
		if c.isClosed() { // Close raced with the reopen
			c.port.Store(nil)
			_ = p.Close()
			return
		}
		c.counts.Reconnects.Add(1)
		c.event(bridges.LinkEvent{Kind: bridges.LinkReconnected, Gap: time.Since(down)})
	}
}

// reopen keeps trying to open the port path until it works or Close.
func (c *Conn) reopen() (io.ReadWriteCloser, bool) {
	t := time.NewTicker(c.cfg.ReconnectWait)
	defer t.Stop()
	for {
		select {
		case <-c.closed:
			return nil, false
		case <-t.C:
		}
		p, err := openPort(&c.cfg)
		if err == nil {
			if c.isClosed() {
				p.Close()
				return nil, false
			}
			return p, true
		}
	}
}

// push queues a copy of it for Recv, dropping the oldest entry if the queue
// is full.
func (c *Conn) push(it *rxItem) {
	for {
		select {
		case c.rx <- *it:
			return
		default:
		}
		select {
		case <-c.rx:
			c.counts.Dropped.Add(1)
		default:
		}
	}
}

func (c *Conn) pushErr(err error) {
	it := rxItem{err: err}
	c.push(&it)
}

func (c *Conn) event(e bridges.LinkEvent) {
	for {
		select {
		case c.events <- e:
			return
		default:
		}
		select {
		case <-c.events:
		default:
		}
	}
}

func (c *Conn) writeLoop() {
	var lineFree time.Time // paced: when the line has sent the previous frame
	for {
		select {
		case <-c.closed:
			return
		case buf := <-c.full:
			if c.cfg.Pace {
				lineFree = c.pace(lineFree, len(buf.b))
			}
			if box := c.port.Load(); box != nil {
				n, err := box.p.Write(buf.b)
				c.counts.BytesSent.Add(uint64(n))
				if err == nil {
					c.counts.FramesSent.Add(1)
				} else {
					e := fmt.Errorf("serial: writing to %s: %w", c.name, err)
					c.writeErr.Store(&e)
				}
			}
			c.free <- buf
		}
	}
}

// pace waits until a frame of n bytes, started when the line is free (or
// now, if it has been idle), would have its last byte on the far side at
// Baud, and returns that time. The whole frame is then written at once: a
// receiver can use a frame only when its last byte has come, so this is
// the moment that matters. Sleeping can only make the frame later, never
// earlier, than a real line would deliver it.
func (c *Conn) pace(lineFree time.Time, n int) time.Time {
	start := time.Now()
	if lineFree.After(start) {
		start = lineFree
	}
	done := start.Add(protocol.UARTTime(n, c.cfg.Baud))
	if d := time.Until(done); d > 0 {
		if c.paceTimer == nil {
			c.paceTimer = time.NewTimer(d)
		} else {
			c.paceTimer.Reset(d)
		}
		select {
		case <-c.paceTimer.C:
		case <-c.closed:
			c.paceTimer.Stop()
		}
	}
	return done
}

func (c *Conn) isClosed() bool {
	select {
	case <-c.closed:
		return true
	default:
		return false
	}
}

// Send encodes m, COBS-frames it and queues it for the port. It does not
// block: while the link is down it returns an error wrapping
// bridges.ErrDisconnected, and if the port has not taken the frames already
// queued it returns ErrSendQueueFull. A write error seen since the last Send
// is returned once. Send is for one goroutine at a time.
func (c *Conn) Send(m *protocol.Message) error {
	if c.isClosed() {
		return bridges.ErrClosed
	}
	if !c.up.Load() {
		return fmt.Errorf("%w: %s: not sending %v", bridges.ErrDisconnected, c.name, m.Type)
	}
	buf, err := c.takeBuf()
	if err != nil {
		return err
	}
	b, err := protocol.AppendWire(buf.b[:0], c.scratch[:], m)
	if err != nil {
		c.free <- buf
		return err
	}
	buf.b = b
	c.full <- buf
	return nil
}

// takeBuf reports a pending write error once, or takes a free send buffer.
func (c *Conn) takeBuf() (*txBuf, error) {
	if e := c.writeErr.Swap(nil); e != nil {
		return nil, *e
	}
	select {
	case buf := <-c.free:
		return buf, nil
	default:
		return nil, ErrSendQueueFull
	}
}

// SendFrame COBS-frames one already encoded frame exactly as given and
// queues it, as Send does with a message. Nothing in the frame is checked:
// tools (the conformance battery) use it to send deliberately damaged
// frames. A frame longer than protocol.MaxFrameLen is refused.
func (c *Conn) SendFrame(frame []byte) error {
	if len(frame) > protocol.MaxFrameLen {
		return fmt.Errorf("serial: frame of %d bytes is longer than the %d-byte limit", len(frame), protocol.MaxFrameLen)
	}
	if c.isClosed() {
		return bridges.ErrClosed
	}
	if !c.up.Load() {
		return fmt.Errorf("%w: %s: not sending a raw frame", bridges.ErrDisconnected, c.name)
	}
	buf, err := c.takeBuf()
	if err != nil {
		return err
	}
	out := buf.b[:protocol.COBSMaxLen(len(frame))+1]
	k, err := protocol.EncodeCOBS(out, frame)
	if err != nil {
		c.free <- buf
		return err
	}
	out[k] = 0
	buf.b = out[:k+1]
	c.full <- buf
	return nil
}

// Recv waits for the next message until deadline (a zero deadline waits
// without limit). A frame that failed its checks comes back as a
// *bridges.FrameError and the link stays usable. When the link drops, Recv
// returns an error wrapping bridges.ErrDisconnected once; deadlines that pass
// while it is still down give an error wrapping both bridges.ErrTimeout and
// bridges.ErrDisconnected. After Close, or after a NewConn stream failed, it
// returns bridges.ErrClosed. Recv is for one goroutine at a time.
func (c *Conn) Recv(deadline time.Time, m *protocol.Message) error {
	select {
	case it := <-c.rx:
		return c.deliver(&it, m)
	default:
	}
	if c.isClosed() {
		return bridges.ErrClosed
	}
	var timeout <-chan time.Time
	if !deadline.IsZero() {
		d := time.Until(deadline)
		if d <= 0 {
			return c.timeoutErr()
		}
		c.timer.Reset(d)
		defer c.timer.Stop()
		timeout = c.timer.C
	}
	select {
	case it := <-c.rx:
		return c.deliver(&it, m)
	case <-timeout:
		return c.timeoutErr()
	case <-c.closed:
		// Deliver what the reader queued before closing, if anything.
		select {
		case it := <-c.rx:
			return c.deliver(&it, m)
		default:
		}
		return bridges.ErrClosed
	}
}

// timeoutDownError is a deadline that passed while the port was away.
type timeoutDownError struct{}

func (timeoutDownError) Error() string {
	return "bridges: receive deadline passed while the link is down (reconnecting)"
}

func (timeoutDownError) Unwrap() []error {
	return []error{bridges.ErrTimeout, bridges.ErrDisconnected}
}

var errTimeoutDown error = timeoutDownError{}

func (c *Conn) timeoutErr() error {
	if !c.up.Load() {
		return errTimeoutDown
	}
	return bridges.ErrTimeout
}

// deliver copies the header and the part of the message its type uses; the
// other parts of m are left as they were (they carry no meaning).
func (c *Conn) deliver(it *rxItem, m *protocol.Message) error {
	if it.err != nil {
		return it.err
	}
	src := &it.msg
	m.Version, m.Type, m.Seq = src.Version, src.Type, src.Seq
	switch src.Type {
	case protocol.TypeGreeting:
		m.Greeting = src.Greeting
	case protocol.TypeConfig:
		m.Config = src.Config
	case protocol.TypeState:
		m.State = src.State
	case protocol.TypeCommand:
		m.Command = src.Command
	case protocol.TypeStop:
		m.Stop = src.Stop
	}
	return nil
}

// Stats returns the link's counters so far.
func (c *Conn) Stats() bridges.Stats { return c.counts.Snapshot() }

// Events reports disconnects and reconnects. The channel is never closed;
// if nobody drains it, the oldest events are dropped.
func (c *Conn) Events() <-chan bridges.LinkEvent { return c.events }

// Up reports whether the port is currently open.
func (c *Conn) Up() bool { return c.up.Load() }

// Close writes what Send has already queued (for at most closeFlushWait,
// so the rig's last stop is not lost when the port closes right after it),
// then stops the link and closes the port. It is safe to call more than
// once; Recv and Send then return bridges.ErrClosed.
func (c *Conn) Close() error {
	var err error
	c.once.Do(func() {
		c.flush(closeFlushWait)
		close(c.closed)
		if box := c.port.Swap(nil); box != nil {
			err = box.p.Close()
		}
		c.up.Store(false)
	})
	return err
}

// closeFlushWait bounds how long Close waits for the frames already queued
// to be written (our choice: many frames' wire time at the slowest common
// baud rate, and short enough for a person to not notice).
const closeFlushWait = time.Second

// flush waits, at most max, until the write loop has written every frame
// queued so far. A stop queued just before Close must reach the peer: a
// board that never hears it stays in the session, silent, and the next
// rig on the same port gets no greeting. A link that is down has nothing
// to write to and is not waited for.
func (c *Conn) flush(max time.Duration) {
	deadline := time.Now().Add(max)
	for len(c.free) < cap(c.free) && c.up.Load() && time.Now().Before(deadline) {
		time.Sleep(time.Millisecond)
	}
}

var (
	_ bridges.Conn     = (*Conn)(nil)
	_ bridges.Notifier = (*Conn)(nil)
)
