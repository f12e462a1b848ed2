package protocol

import (
	"math"
	"time"
)

// UARTBitsPerByte is what one byte costs on a UART line with 8 data bits,
// no parity and one stop bit (8N1, the framing docs/protocol.md asks for):
// a start bit, eight data bits and a stop bit (common practice).
const UARTBitsPerByte = 10

// StandardBauds are the baud rates a rig's serial link is commonly set to,
// in rising order: the classic rates up to 115 200, their multiples up to
// 921 600, and the megabaud rates USB-UART bridges and microcontroller
// UARTs offer (common practice).
var StandardBauds = []int{9600, 19200, 38400, 57600, 115200, 230400, 460800, 921600, 1000000, 2000000, 3000000, 4000000}

// WireLen is the number of bytes a frame of type t occupies on a byte
// stream: its COBS encoding at the largest (COBSMaxLen) plus the zero
// delimiter, in the current protocol version (the state and command, the
// frames of every tick, have the same length in versions 1 and 2). 0 for
// an unknown type.
func WireLen(t Type) int {
	n := FrameLen(Version, t)
	if n == 0 {
		return 0
	}
	return COBSMaxLen(n) + 1
}

// UARTTime is how long n bytes take on a UART at baud bit/s, at
// UARTBitsPerByte bits per byte. 0 for a baud rate ≤ 0.
func UARTTime(n, baud int) time.Duration {
	if baud <= 0 || n <= 0 {
		return 0
	}
	return time.Duration(math.Round(float64(n) * UARTBitsPerByte * float64(time.Second) / float64(baud)))
}

// WireBudget is one tick's time on a serial line: the state going out and
// the command coming back, one after the other (a lockstep firmware
// answers a state only when all of it has arrived), plus the board's
// compute time between them when it is known.
type WireBudget struct {
	Baud         int           // line rate, bit/s
	TickHz       float64       // tick rate asked for
	StateBytes   int           // a state on the wire: COBS and delimiter included
	CommandBytes int           // a command on the wire
	Wire         time.Duration // both frames at Baud
	Compute      time.Duration // the board's compute time per tick (0: unknown)
	Total        time.Duration // Wire + Compute
	Period       time.Duration // 1 / TickHz
}

// Fits reports whether one tick's round trip fits in the tick period.
func (b WireBudget) Fits() bool { return b.Total <= b.Period }

// SerialBudget computes the wire-time budget of one tick at baud bit/s and
// tickHz ticks per second, with compute the board's compute time per tick
// (0 when unknown).
func SerialBudget(baud int, tickHz float64, compute time.Duration) WireBudget {
	b := WireBudget{Baud: baud, TickHz: tickHz, StateBytes: WireLen(TypeState), CommandBytes: WireLen(TypeCommand), Compute: compute}
	b.Wire = UARTTime(b.StateBytes+b.CommandBytes, baud)
	b.Total = b.Wire + compute
	if tickHz > 0 {
		b.Period = time.Duration(math.Round(float64(time.Second) / tickHz))
	}
	return b
}

// MaxTickHz is the highest whole tick rate whose period holds one tick's
// round trip at baud with compute per tick; 0 for a baud rate ≤ 0.
func MaxTickHz(baud int, compute time.Duration) int {
	b := SerialBudget(baud, 0, compute)
	if baud <= 0 || b.Total <= 0 {
		return 0
	}
	// Whole bits per second over whole bits per tick, in integers where
	// compute is 0, so the table has no rounding surprises.
	if compute == 0 {
		return baud / ((b.StateBytes + b.CommandBytes) * UARTBitsPerByte)
	}
	return int(math.Floor(float64(time.Second) / float64(b.Total)))
}

// LowestBaud is the lowest of StandardBauds whose budget fits tickHz with
// compute per tick; ok is false when none does.
func LowestBaud(tickHz float64, compute time.Duration) (baud int, ok bool) {
	for _, r := range StandardBauds {
		if SerialBudget(r, tickHz, compute).Fits() {
			return r, true
		}
	}
	return 0, false
}
