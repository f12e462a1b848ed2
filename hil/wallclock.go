package hil

import (
	"context"
	"errors"
	"math/rand/v2"
	"runtime"
	"sync"
	"sync/atomic"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/record"
)

// sentRing remembers when each recent state was sent, indexed by sequence
// number, so the receiver can time the matching command's round trip
// without locks or allocation.
const sentRing = 1024

// inbound is one command on its way from the receiver to the loop.
type inbound struct {
	cmd     protocol.Command
	seq     uint32
	release int64 // ns since loop start when it may be applied (latency fault)
	latency time.Duration
	timed   bool // latency is known (the state it answers was in the ring)
}

// mailbox carries commands from the receiver goroutine to the loop: a
// fixed ring under a mutex, so a burst (a flood, or commands held back by a
// latency fault) is kept in order and nothing allocates. It holds as many
// commands as the lockstep latency queue, the bound Config checks latency
// faults against, so the longest allowed delay loses nothing here either.
type mailbox struct {
	mu    sync.Mutex
	items [latencyQueueCap]inbound
	head  int
	n     int
	lost  int // overwritten because the loop did not keep up, not yet reported
}

func (b *mailbox) put(in *inbound) {
	b.mu.Lock()
	if b.n == len(b.items) {
		b.head = (b.head + 1) % len(b.items)
		b.n--
		b.lost++
	}
	b.items[(b.head+b.n)%len(b.items)] = *in
	b.n++
	b.mu.Unlock()
}

// takeDue removes every command released by now. Each one's latency goes
// to lat; the newest one answering a state that was sent (seq ≤ maxSeq) is
// copied to out. It returns how many were taken and whether out was set; a
// command for a sequence number never sent is garbage and only counted.
// Commands overwritten in a full mailbox since the last call count as taken
// (and not applied), so the loop's stale count includes them.
func (b *mailbox) takeDue(now int64, maxSeq uint32, out *inbound, lat *Histogram) (taken int, ok bool) {
	b.mu.Lock()
	taken, b.lost = b.lost, 0
	for b.n > 0 {
		it := &b.items[b.head]
		if it.release > now {
			break
		}
		if it.timed {
			lat.Add(it.latency)
		}
		if it.seq <= maxSeq && (!ok || it.seq > out.seq) {
			*out = *it
			ok = true
		}
		taken++
		b.head = (b.head + 1) % len(b.items)
		b.n--
	}
	b.mu.Unlock()
	return taken, ok
}

// receiver reads the link on its own goroutine in wall-clock mode.
type receiver struct {
	r       *runner
	base    time.Time
	sentAt  [sentRing]atomic.Int64
	sentSeq [sentRing]atomic.Uint32
	box     mailbox
	rng     *rand.Rand // drop, corrupt and latency draws (this goroutine only)
	stop    atomic.Bool
	done    chan struct{}

	badFrames atomic.Uint64
	lastBad   atomic.Pointer[string]
	corrupted atomic.Uint64
	dropped   atomic.Uint64
	closed    atomic.Bool
	down      atomic.Bool // Recv reported bridges.ErrDisconnected
	greeted   atomic.Bool // a greeting came after the handshake
	fwStop    atomic.Pointer[protocol.Stop]
	simT      atomic.Uint64 // tick index, for fault windows
}

func (rc *receiver) loop() {
	defer close(rc.done)
	var m protocol.Message
	var in inbound
	var fe *bridges.FrameError
	r := rc.r
	for !rc.stop.Load() {
		err := r.conn.Recv(time.Now().Add(5*time.Millisecond), &m)
		now := time.Since(rc.base)
		switch {
		case err == nil:
		case errors.Is(err, bridges.ErrTimeout):
			continue
		case errors.Is(err, bridges.ErrDisconnected):
			rc.down.Store(true) // the loop raises link_lost if the link has no events of its own
			continue
		case errors.Is(err, bridges.ErrClosed):
			rc.closed.Store(true)
			return
		case errors.As(err, &fe):
			reason := fe.Reason
			rc.lastBad.Store(&reason)
			rc.badFrames.Add(1)
			continue
		default:
			// Unclassified link error: an outage until the watchdog says
			// otherwise; pause so a link that fails at once cannot spin.
			rc.down.Store(true)
			time.Sleep(time.Millisecond)
			continue
		}
		switch m.Type {
		case protocol.TypeCommand:
			t := float64(rc.simT.Load()) * r.dt
			if r.chance(FaultDrop, t, rc.rng) {
				rc.dropped.Add(1)
				continue
			}
			if r.chance(FaultCorrupt, t, rc.rng) {
				reason := "injected corruption (a real link's CRC check rejects such a frame)"
				rc.lastBad.Store(&reason)
				rc.corrupted.Add(1)
				rc.badFrames.Add(1)
				continue
			}
			in.cmd, in.seq = m.Command, m.Seq
			release := now + r.latencyDelay(t, rc.rng)
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

// wallclock runs ticks paced by the real clock.
func (r *runner) wallclock(ctx context.Context) error {
	runtime.LockOSThread()
	defer runtime.UnlockOSThread()
	if r.cfg.RealtimePriority > 0 {
		var granted bool
		granted, r.realtime = requestRealtime(r.cfg.RealtimePriority)
		if granted {
			defer dropRealtime()
		}
	} else {
		r.realtime = "real-time scheduling not requested"
	}
	r.logf("%s", r.realtime)
	r.al.info("scheduling", 0, 0, r.realtime, nil)

	rc := &receiver{r: r, base: time.Now(), done: make(chan struct{}),
		rng: rand.New(rand.NewPCG(uint64(r.cfg.Seed), 0x2ec5))}
	go rc.loop()
	defer func() {
		rc.stop.Store(true)
		<-rc.done
	}()

	period := time.Duration(float64(time.Second) / r.cfg.TickHz)
	start := rc.base.Add(period) // first tick one period after the receiver started
	lastValid := start
	var lastBad, lastCorrupt uint64
	var in inbound
	var appliedSeq uint32
	for !r.done() {
		due := start.Add(time.Duration(r.tick) * period)
		waitUntil(due)
		now := time.Now()
		r.jitter.Add(now.Sub(due))
		if r.aborted(ctx) {
			break
		}
		r.drainLinkEvents()
		if n := rc.badFrames.Load(); n != lastBad {
			c := rc.corrupted.Load()
			r.counts.Corrupted += c - lastCorrupt
			lastCorrupt = c
			reason := "a frame failed its checks"
			if p := rc.lastBad.Load(); p != nil {
				reason = *p
			}
			// One alarm per tick at most; the count is exact.
			r.counts.BadFrames += n - lastBad - 1
			lastBad = n
			r.badFrame(reason)
		}
		if rc.down.Swap(false) {
			r.disconnected(bridges.ErrDisconnected)
		}
		if rc.greeted.Swap(false) {
			r.greetedAgain()
		}
		if st := rc.fwStop.Load(); st != nil {
			r.firmwareStop(*st)
			break
		}
		if rc.closed.Load() {
			r.linkLost("link to the firmware closed")
			if r.outcome == "" {
				r.outcome, r.reason, r.stopCode = record.Aborted, "the link to the firmware closed", protocol.StopEStop
			}
			break
		}
		r.fresh = false
		r.latUS = nan
		if k, ok := rc.box.takeDue(int64(now.Sub(rc.base)), r.seq, &in, r.latency); k > 0 {
			if ok && in.seq > appliedSeq {
				appliedSeq = in.seq
				lastValid = now
				r.linkDown = false
				if in.timed {
					r.latUS = float64(in.latency) / float64(time.Microsecond)
				}
				r.takeCommand(&in.cmd)
				r.counts.StaleCommands += uint64(k - 1)
			} else {
				r.counts.StaleCommands += uint64(k)
			}
		}
		if r.outcome != "" {
			// The tripping command still gets its tick with the e-stop's
			// zero torque, so the log shows what was sent and applied.
			r.advance(now)
			break
		}
		if silent := now.Sub(lastValid); silent > r.cfg.Watchdog {
			r.watchdog(silent)
			break
		}
		// Send this tick's state, then step the plant while the firmware
		// computes; its answer is applied at the next tick.
		r.sense()
		if r.chance(FaultDrop, r.s.T, r.frng) {
			r.counts.DroppedStates++
		} else {
			slot := r.seq % sentRing
			rc.sentAt[slot].Store(int64(time.Since(rc.base)))
			rc.sentSeq[slot].Store(r.seq)
			r.counts.StatesSent++
			r.conn.Send(&r.out) // a failed send loses this state; the receiver reports the link
		}
		rc.simT.Store(uint64(r.tick))
		r.advance(now)
		if time.Now().After(due.Add(period)) {
			r.misses++
			if r.al.raise(AlarmDeadlineMiss, r.tick, r.s.T, -1, -1, func() (string, map[string]float64) {
				return "a tick's work ended after the next tick was due", map[string]float64{"misses_so_far": float64(r.misses)}
			}) {
				r.trip(protocol.StopEStop)
			}
		}
	}
	r.counts.DroppedCommand += rc.dropped.Load()
	return nil
}
