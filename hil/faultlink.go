package hil

// This file owns the injected link faults: drop, corrupt and latency as a
// decorator of the firmware link, so both clocks get them from one place,
// and the ring that holds commands back until the tick they are due.

import (
	"errors"
	"math"
	"math/rand/v2"
	"sync/atomic"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
)

// latencyQueueCap is how many delayed commands the loop can hold: at 1 kHz,
// about a second of delay. Config refuses a latency fault longer than this
// in ticks.
const latencyQueueCap = 1024

// awaitNone and awaitAny are the values of faultLink.awaited besides a
// sequence number.
const (
	awaitNone = 0  // before the ticks start: the handshake sees no faults
	awaitAny  = -1 // wall-clock: every command is exposed to the faults
)

// injectedCorruption is the reason of the frame error an injected
// corruption comes out as.
const injectedCorruption = "injected corruption (a real link's CRC check rejects such a frame)"

// faultLink is a bridges.Conn that injects Config.LinkFaults into the real
// link it wraps, the way a bad cable or a congested network would look to
// the loop:
//
//   - drop: a state handed to Send is lost (Send reports success, as a
//     real link's lost frame does); a command is lost on the way in (Recv
//     reads on until its deadline);
//   - corrupt: a command comes out of Recv as a *bridges.FrameError, as a
//     real link's CRC check reports it;
//   - latency: each command that passes gets a delay, left in the delay field
//     after Recv. The clock holds the command in a commandRing until it is
//     due in its own time (lockstep: whole ticks, so a run stays
//     bit-identical; wall-clock: the exact delay on the real clock), while
//     the reply still counts as arrived for the watchdog: the firmware did
//     answer, the wire is slow. The link draws the delay but does not hold
//     the command, because lockstep's virtual time waits on the answer
//     having come and counts the delay in ticks the link does not see.
//
// Only states and the commands the loop awaits are exposed: in lockstep the
// command echoing the awaited sequence number, so that stale replies (whose
// number depends on how busy the host is) draw no random numbers and the
// draws, and with them the run, are the same every time; in wall-clock
// every command. The draws come in the order drop, corrupt, latency from one
// stream per direction; lockstep passes the same stream for both, so the
// order of all draws is the order of the link traffic.
type faultLink struct {
	bridges.Conn // the real link: Close, Stats pass through

	faults  []LinkFault
	sendRNG *rand.Rand // drop draws for states: the loop's goroutine
	recvRNG *rand.Rand // drop, corrupt and latency draws for commands: the goroutine that calls Recv

	// Set by the loop before each exchange; read by Recv, which in
	// wall-clock mode runs on the receiver goroutine, hence atomic.
	simT    atomic.Uint64 // float64 bits of the simulated time fault windows are checked against
	awaited atomic.Int64  // sequence number of the awaited command, awaitNone or awaitAny

	delay      time.Duration      // latency drawn for the command Recv returned last (Recv's goroutine)
	corruptErr bridges.FrameError // returned for every injected corruption, so none allocates

	// interrupt, while not nil, cuts Recv short when it is closed: set
	// around the handshake (the operator's SIGINT), on the loop's
	// goroutine, before the wall-clock receiver starts.
	interrupt <-chan struct{}

	statesSent, droppedStates, droppedCommands, corrupted atomic.Uint64
}

func newFaultLink(conn bridges.Conn, faults []LinkFault, sendRNG, recvRNG *rand.Rand) *faultLink {
	return &faultLink{Conn: conn, faults: faults, sendRNG: sendRNG, recvRNG: recvRNG,
		corruptErr: bridges.FrameError{Reason: injectedCorruption}}
}

// at sets the simulated time the fault windows are checked against: the
// start of the tick whose state goes out next.
func (f *faultLink) at(t float64) { f.simT.Store(math.Float64bits(t)) }

// await says which commands are exposed to the faults: the one echoing seq
// (lockstep), awaitAny (wall-clock) or awaitNone.
func (f *faultLink) await(seq int64) { f.awaited.Store(seq) }

func (f *faultLink) time() float64 { return math.Float64frombits(f.simT.Load()) }

// Send passes m on, unless it is a state that a drop fault loses.
func (f *faultLink) Send(m *protocol.Message) error {
	if m.Type == protocol.TypeState {
		if len(f.faults) > 0 && f.chance(FaultDrop, f.time(), f.sendRNG) {
			f.droppedStates.Add(1)
			return nil
		}
		f.statesSent.Add(1)
	}
	return f.Conn.Send(m)
}

// Recv returns the next message of the real link after the faults had
// their say: a dropped command is skipped, a corrupted one is a
// *bridges.FrameError, a delayed one comes with the delay field set. It
// does not allocate.
func (f *faultLink) Recv(deadline time.Time, m *protocol.Message) error {
	if f.interrupt != nil {
		return f.recvInterruptible(deadline, m)
	}
	return f.recv(deadline, m)
}

// interruptPoll is how often a wait that can be interrupted looks at the
// interrupt: short enough that an operator's SIGINT ends a wait for the
// greeting at once as a person sees it.
const interruptPoll = 20 * time.Millisecond

// errInterrupted ends a wait that the operator interrupted.
var errInterrupted = errors.New("interrupted by the operator")

// recvInterruptible is recv in slices of interruptPoll, returning
// errInterrupted as soon as f.interrupt is closed. Only the handshake
// uses it (the loop checks its context every tick and every wait itself);
// a bridges.Conn has no way to cancel a Recv, so the wait is cut up.
func (f *faultLink) recvInterruptible(deadline time.Time, m *protocol.Message) error {
	for {
		select {
		case <-f.interrupt:
			return errInterrupted
		default:
		}
		sub := time.Now().Add(interruptPoll)
		if deadline.Before(sub) {
			sub = deadline
		}
		err := f.recv(sub, m)
		if errors.Is(err, bridges.ErrTimeout) && sub.Before(deadline) {
			continue
		}
		return err
	}
}

// recv is Recv through the faults.
func (f *faultLink) recv(deadline time.Time, m *protocol.Message) error {
	for {
		err := f.Conn.Recv(deadline, m)
		f.delay = 0
		if err != nil || m.Type != protocol.TypeCommand || len(f.faults) == 0 {
			return err
		}
		if aw := f.awaited.Load(); aw != awaitAny && int64(m.Seq) != aw {
			return nil
		}
		t := f.time()
		if f.chance(FaultDrop, t, f.recvRNG) {
			f.droppedCommands.Add(1)
			continue
		}
		if f.chance(FaultCorrupt, t, f.recvRNG) {
			f.corrupted.Add(1)
			return &f.corruptErr
		}
		f.delay = f.latency(t, f.recvRNG)
		return nil
	}
}

// latency draws the delay the active latency faults add to one command.
func (f *faultLink) latency(t float64, rng *rand.Rand) time.Duration {
	var d time.Duration
	for i := range f.faults {
		lf := &f.faults[i]
		if lf.Kind != FaultLatency || !lf.active(t) {
			continue
		}
		d += lf.Fixed
		if lf.Jitter > 0 {
			d += time.Duration(rng.Float64() * float64(lf.Jitter))
		}
	}
	return d
}

// chance reports whether an active fault of the kind fires for one frame.
// It draws once per active fault of the kind until one fires.
func (f *faultLink) chance(kind LinkFaultKind, t float64, rng *rand.Rand) bool {
	for i := range f.faults {
		lf := &f.faults[i]
		if lf.Kind == kind && lf.active(t) && rng.Float64() < lf.Rate {
			return true
		}
	}
	return false
}

// heldCommand is one command on its way from the link to the tick that
// applies it.
type heldCommand struct {
	cmd     protocol.Command
	seq     uint32
	release int64         // when it may be applied, in the clock's unit: tick index (lockstep) or ns since the loop started (wall-clock)
	latency time.Duration // round trip including the injected delay (wall-clock)
	timed   bool          // latency is known
}

// commandRing holds commands in arrival order until they are due: a fixed
// ring, so a burst (a flood, or commands held back by a latency fault) is
// kept in order and nothing allocates. It holds latencyQueueCap commands,
// the bound Config checks latency faults against, so the longest allowed
// delay loses nothing. A command that does not fit pushes out the oldest,
// which is counted as taken (not applied), so a flood shows in the stale
// count.
type commandRing struct {
	items [latencyQueueCap]heldCommand
	head  int
	n     int
	lost  int // pushed out since the last takeDue
}

func (q *commandRing) put(c *heldCommand) {
	if q.n == len(q.items) {
		q.head = (q.head + 1) % len(q.items)
		q.n--
		q.lost++
	}
	q.items[(q.head+q.n)%len(q.items)] = *c
	q.n++
}

// takeDue removes every command released by now, in arrival order up to
// the first that is not due yet. The newest one answering a state that
// was sent (seq ≤ maxSeq) is copied to out; the others are superseded and
// only counted, so their round trips stay out of the latency figures (a
// stale answer to a resent or older state is not how long the firmware
// takes to answer the state that was applied). It returns how many were
// taken (those pushed out since the last call included) and whether out
// was set; a command for a sequence number never sent is garbage and only
// counted.
//
// A knee-unlock request (protocol section 3.4.1) is an event, not a level:
// the firmware sends it once. The unlock bits of the superseded commands
// are therefore carried into out, so a request is not lost because a
// newer command came due in the same tick.
func (q *commandRing) takeDue(now int64, maxSeq uint32, out *heldCommand) (taken int, ok bool) {
	taken, q.lost = q.lost, 0
	var unlock uint8
	for q.n > 0 {
		it := &q.items[q.head]
		if it.release > now {
			break
		}
		if it.seq <= maxSeq {
			unlock |= it.cmd.KneeUnlock
			if !ok || it.seq > out.seq {
				*out = *it
				ok = true
			}
		}
		taken++
		q.head = (q.head + 1) % len(q.items)
		q.n--
	}
	if ok {
		out.cmd.KneeUnlock |= unlock
	}
	return taken, ok
}
