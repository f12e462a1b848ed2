package hil

// This file holds the wall-clock clock: ticks paced by the real clock, a
// receiver goroutine that reads the link into a mailbox, and each tick
// applying the newest command that has arrived (it answers an earlier
// state; none holds the last torque).

import (
	"context"
	"runtime"
	"sync"
	"sync/atomic"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/internal/hostload"
)

// sentRing remembers when each recent state was sent, indexed by sequence
// number, so the receiver can time the matching command's round trip
// without locks or allocation.
const sentRing = 1024

// receivePoll is how long one Recv of the receiver waits, so it sees the
// end of the run soon after the loop asks.
const receivePoll = 5 * time.Millisecond

// wallclock runs the ticks paced by the real clock, on a thread of its own
// with the real-time scheduling class if granted.
func (r *runner) wallclock(ctx context.Context) {
	runtime.LockOSThread()
	defer runtime.UnlockOSThread()
	tm := &r.times
	if r.cfg.RealtimePriority > 0 {
		var granted bool
		granted, tm.realtime = requestRealtime(r.cfg.RealtimePriority)
		if granted {
			defer dropRealtime()
		}
	} else {
		tm.realtime = "real-time scheduling not requested"
	}
	r.logf("%s", tm.realtime)
	r.al.info("scheduling", 0, 0, tm.realtime, nil)

	r.sess.link.await(awaitAny) // every command meets the link faults
	rc := &receiver{r: r, base: time.Now(), done: make(chan struct{}), badReasons: make(chan string, badReasonQueue)}
	go rc.loop()
	defer func() {
		if rc.stop.CompareAndSwap(false, true) { // a panic between here and the end of ticks
			<-rc.done
		}
	}()
	period := time.Duration(float64(time.Second) / r.cfg.TickHz)
	p := &realPacer{start: rc.base.Add(period), period: period, jitter: tm.jitter} // first tick one period after the receiver started
	src := &wallclockSource{r: r, rc: rc, p: p, lastValid: p.start}
	r.ticks(ctx, p, src)
	// Frames the receiver rejected after the last tick looked: counted,
	// so the bad-frame count matches what the link saw (no alarm: the run
	// is over). The receiver has stopped once done is closed.
	rc.stop.Store(true)
	<-rc.done
	r.health.counts.BadFrames += rc.badFrames.Load() - src.lastBad
}

// mailbox carries commands from the receiver goroutine to the loop: a
// commandRing under a mutex, released by nanoseconds since the receiver
// started.
type mailbox struct {
	mu   sync.Mutex
	ring commandRing
}

func (b *mailbox) put(c *heldCommand) {
	b.mu.Lock()
	b.ring.put(c)
	b.mu.Unlock()
}

// takeDue is commandRing.takeDue under the lock.
func (b *mailbox) takeDue(now int64, maxSeq uint32, out *heldCommand) (taken int, ok bool) {
	b.mu.Lock()
	taken, ok = b.ring.takeDue(now, maxSeq, out)
	b.mu.Unlock()
	return taken, ok
}

// receiver reads the link on its own goroutine in wall-clock mode and
// reports to the loop through atomics; the loop acts on the reports at its
// next tick.
type receiver struct {
	r       *runner
	base    time.Time
	sentAt  [sentRing]atomic.Int64
	sentSeq [sentRing]atomic.Uint32
	box     mailbox
	stop    atomic.Bool
	done    chan struct{}

	badFrames atomic.Uint64
	lastBad   atomic.Pointer[string]
	closed    atomic.Bool
	down      atomic.Bool  // Recv reported the peer gone, or an error the link does not classify
	greeted   atomic.Bool  // a greeting came after the handshake
	stalled   atomic.Int64 // ns the receiver was not running (a Recv that returned long after its deadline), not yet taken by the loop
	fwStop    atomic.Pointer[protocol.Stop]

	// badReasons carries the reason of each rejected frame to the loop, so
	// every kind is counted and the first of each kind logged (health.go);
	// bounded: reasons that do not fit are counted in badFrames only.
	badReasons chan string
}

// badReasonQueue bounds the reasons of rejected frames waiting for the
// loop; a flood of garbage beyond it is still counted.
const badReasonQueue = 64

func (rc *receiver) loop() {
	defer close(rc.done)
	var m protocol.Message
	var in heldCommand
	var fe *bridges.FrameError
	link := rc.r.sess.link
	for !rc.stop.Load() {
		deadline := time.Now().Add(receivePoll)
		err := link.Recv(deadline, &m)
		now := time.Since(rc.base)
		switch classify(err, &fe) {
		case linkOK:
		case linkTimeout:
			// Woken long after the deadline: the host did not run the
			// receiver, so answers could not be read meanwhile.
			if late := time.Since(deadline); late > hostload.StallSlack {
				rc.stalled.Add(int64(late))
			}
			continue
		case linkDisconnected:
			rc.down.Store(true) // the loop raises link_lost if the link has no events of its own
			continue
		case linkClosed:
			rc.closed.Store(true)
			return
		case linkFrame:
			reason := fe.Reason
			rc.lastBad.Store(&reason)
			// Queue the reason before counting the frame, so a count the
			// loop reads never runs ahead of the queued reasons.
			select {
			case rc.badReasons <- reason:
			default:
			}
			rc.badFrames.Add(1)
			continue
		case linkOther:
			// An outage until the watchdog says otherwise; pause so a link
			// that fails at once cannot spin.
			rc.down.Store(true)
			time.Sleep(time.Millisecond)
			continue
		}
		switch m.Type {
		case protocol.TypeCommand:
			in.cmd, in.seq = m.Command, m.Seq
			release := now + link.delay
			in.release = int64(release)
			slot := m.Seq % sentRing
			in.timed = rc.sentSeq[slot].Load() == m.Seq
			if in.timed {
				in.latency = release - time.Duration(rc.sentAt[slot].Load())
			}
			rc.box.put(&in)
		case protocol.TypeStop:
			st := m.Stop
			rc.fwStop.Store(&st)
		case protocol.TypeGreeting:
			rc.greeted.Store(true)
		}
	}
}

// wallclockSource obtains each tick's command from the mailbox.
type wallclockSource struct {
	r          *runner
	rc         *receiver
	p          *realPacer
	lastValid  time.Time // tick start at which the last valid command was applied, moved on by the rig's stalls
	lastBad    uint64    // receiver's bad-frame count already reported
	appliedSeq uint32    // sequence number of the newest command applied
	take       heldCommand
}

// beforeState acts on what the receiver reported, applies the newest due
// command and checks the watchdog.
func (w *wallclockSource) beforeState(now time.Time) bool {
	r, rc := w.r, w.rc
	if w.p.late {
		r.stalls.lateTicks++
	}
	// The longer of the loop's and the receiver's stall since the last
	// tick (a stall of the whole process shows in both): time in which the
	// firmware's answer could not be taken, so the watchdog does not
	// count it.
	stall := max(w.p.stall, time.Duration(rc.stalled.Swap(0)))
	if stall > 0 {
		w.lastValid = w.lastValid.Add(stall)
		if w.lastValid.After(now) {
			w.lastValid = now
		}
		r.hostStall(stall)
	}
	if n := rc.badFrames.Load(); n != w.lastBad {
		// Each queued reason is one bad frame with its kind; frames whose
		// reason did not fit the queue count under the latest reason.
		reported := uint64(0)
		for more := true; more && reported < n-w.lastBad; {
			select {
			case reason := <-rc.badReasons:
				r.badFrame(reason)
				reported++
			default:
				more = false
			}
		}
		reason := "a frame failed its checks"
		if p := rc.lastBad.Load(); p != nil {
			reason = *p
		}
		if rest := n - w.lastBad - reported; rest > 0 {
			r.badFrames(reason, rest)
		}
		w.lastBad = n
	}
	if rc.down.Swap(false) {
		r.disconnected(bridges.ErrDisconnected)
	}
	if rc.greeted.Swap(false) {
		r.greetedAgain()
	}
	if st := rc.fwStop.Load(); st != nil {
		r.firmwareStop(*st)
		return false
	}
	if rc.closed.Load() {
		r.linkClosed()
		return false
	}
	if k, ok := rc.box.takeDue(int64(now.Sub(rc.base)), r.sess.seq, &w.take); k > 0 {
		if ok && w.take.seq > w.appliedSeq {
			w.appliedSeq = w.take.seq
			w.lastValid = now
			r.validCommand()
			if w.take.timed {
				// The summary's round trip is exactly the rows' latency_us:
				// the applied command only, never a superseded one.
				r.times.latency.Add(w.take.latency)
				r.pt.latUS = float64(w.take.latency) / float64(time.Microsecond)
			}
			r.takeCommand(&w.take.cmd)
			r.health.counts.StaleCommands += uint64(k - 1)
		} else {
			r.health.counts.StaleCommands += uint64(k)
		}
	}
	if r.end.set() {
		return true // the tick runs, with the e-stop's torque
	}
	if silent := now.Sub(w.lastValid); silent > r.cfg.Watchdog {
		r.watchdog(silent)
		return false
	}
	return true
}

// sending notes when the state went out, for the round trip of its
// answer.
func (w *wallclockSource) sending(seq uint32) {
	slot := seq % sentRing
	w.rc.sentAt[slot].Store(int64(time.Since(w.rc.base)))
	w.rc.sentSeq[slot].Store(seq)
}

// afterState returns at once: the answer to this state is applied at a
// later tick.
func (w *wallclockSource) afterState(context.Context) bool { return true }
