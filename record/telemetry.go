package record

import (
	"fmt"
	"sync/atomic"
	"time"
)

// Telemetry rows are formatted on a goroutine of their own. Formatting a
// row with exact (shortest round-trip) floats costs about as much as a
// plant tick, and on a machine with a spare core the loop should not pay it:
// Tick copies the row into a fixed queue and returns.
//
// The telemetry goroutine wakes on a short ticker rather than on every row,
// so handing over a row never costs the loop a goroutine wake-up; it then
// drains the queue. A full queue makes Tick wait: rows are never dropped.

// teleQueueLen is how many rows may wait for the telemetry goroutine: a few
// milliseconds of lockstep at full speed.
const teleQueueLen = 2048

// telePoll is how often the telemetry goroutine drains the queue. It is
// well under FlushInterval, so rows still reach the file within it.
const telePoll = time.Millisecond

// telePipe is the hand-over between Tick and the telemetry goroutine.
type telePipe struct {
	rows   chan Tick
	flush  chan chan error // Flush requests, answered when the file has every row
	stop   chan struct{}   // closed by Close
	done   chan struct{}   // closed when the goroutine has written everything
	closed atomic.Bool
	err    atomic.Pointer[error] // first telemetry write error
}

// startTelemetry starts the telemetry goroutine; Create calls it once the
// header is written.
func (w *Writer) startTelemetry() {
	w.pipe = telePipe{
		rows:  make(chan Tick, teleQueueLen),
		flush: make(chan chan error),
		stop:  make(chan struct{}),
		done:  make(chan struct{}),
	}
	go w.telemetryLoop()
}

// telemetryLoop formats queued rows, flushes the file every FlushInterval,
// answers Flush requests and, after stop, writes what is left and ends.
func (w *Writer) telemetryLoop() {
	defer close(w.pipe.done)
	tick := time.NewTicker(telePoll)
	defer tick.Stop()
	for {
		select {
		case <-tick.C:
			w.drainRows()
			if now := time.Now(); now.Sub(w.lastFlush) >= FlushInterval {
				w.lastFlush = now
				w.flushFile()
			}
		case ack := <-w.pipe.flush:
			w.drainRows()
			w.lastFlush = time.Now()
			ack <- w.flushFile()
		case <-w.pipe.stop:
			w.drainRows()
			w.flushFile()
			return
		}
	}
}

// drainRows writes every row waiting in the queue to the file buffer.
func (w *Writer) drainRows() {
	for {
		select {
		case w.cur = <-w.pipe.rows:
			// Into a field of the Writer, not a local: the column getters
			// are called through function values, so a local row would
			// escape to the heap, one allocation per row.
			w.writeRow(&w.cur)
		default:
			return
		}
	}
}

// writeRow formats one row into the reused buffer and appends it.
func (w *Writer) writeRow(t *Tick) {
	if w.pipe.err.Load() != nil {
		return // the file failed; keep draining so Tick never blocks
	}
	w.row = appendRow(w.row[:0], w.cols, t)
	if _, err := w.teleBuf.Write(w.row); err != nil {
		w.setTeleErr(err)
	}
}

// flushFile writes the buffer to the file and returns the first telemetry
// error, if any.
func (w *Writer) flushFile() error {
	if err := w.pipe.err.Load(); err != nil {
		return *err
	}
	if err := w.teleBuf.Flush(); err != nil {
		w.setTeleErr(err)
		return *w.pipe.err.Load()
	}
	return nil
}

func (w *Writer) setTeleErr(err error) {
	e := fmt.Errorf("record: telemetry: %w", err)
	w.pipe.err.CompareAndSwap(nil, &e)
}

// flushTelemetry asks the telemetry goroutine to write every queued row and
// flush, and waits for it.
func (w *Writer) flushTelemetry() error {
	ack := make(chan error, 1)
	select {
	case w.pipe.flush <- ack:
		return <-ack
	case <-w.pipe.done:
		return nil
	}
}

// stopTelemetry writes what is queued, ends the goroutine and returns the
// first telemetry error. Close calls it once.
func (w *Writer) stopTelemetry() error {
	w.pipe.closed.Store(true)
	close(w.pipe.stop)
	<-w.pipe.done
	if err := w.pipe.err.Load(); err != nil {
		return *err
	}
	return nil
}
