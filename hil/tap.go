package hil

// This file owns the tap: decimated snapshots of the running loop handed
// to an observer (the live view, metrics) without allocation or locks in
// the tick path. The tick core calls it once per tick; it does its work
// only when a snapshot is due.

import (
	"math"
	"sync/atomic"
	"time"

	"gaitrig/bridges/protocol"
	"gaitrig/plant"
	"gaitrig/record"
)

// DefaultTapInterval is the simulated time between two snapshots of a Tap
// whose Interval is zero: 50 per second of run time, enough for a smooth
// picture and cheap for the loop.
const DefaultTapInterval = 1.0 / 50

// Snapshot is the loop's state at one tick, fixed in size so it can be
// copied into preallocated buffers. Strings in it are constants of the
// loop or the reason the run ended; none is built for the snapshot.
type Snapshot struct {
	// Seq numbers snapshots from 1 in the order the loop made them.
	Seq uint64
	// Tick is the index of the tick just stepped; T its simulated end, s.
	Tick int64
	T    float64
	// Wall is the wall time the tick started (zero in lockstep).
	Wall time.Time
	// NumQ generalized coordinates are valid in Q and V (plant order).
	NumQ int
	Q, V [plant.MaxDOF]float64
	// Pose are the stick-figure points of the walker.
	Pose plant.Pose
	// Joints joint values are valid in Angle (as sent to the firmware,
	// rad), Commanded and Applied (N·m).
	Joints                    int
	Angle, Commanded, Applied [protocol.MaxJoints]float64
	// Feet are the two contact records of the tick (plant.FootContact).
	Feet [2]plant.FootContact
	// Stance is the stance foot (0 left, 1 right).
	Stance int
	// LatencyUS is the round trip of the tick's command, µs; NaN when the
	// tick took none or the run is in lockstep (virtual time).
	LatencyUS float64
	// JitterUS is how late the tick started, µs; NaN in lockstep.
	JitterUS float64
	// Steps is the number of completed steps.
	Steps int
	// Fresh says whether the tick took a new command.
	Fresh bool
	// Ticks so far, deadline misses, states resent, and rejected frames,
	// cumulative over the run.
	Ticks, DeadlineMisses, Resent, BadFrames uint64
	// Outcome is set once the loop has ended the run early (a trip, a
	// failure, an abort), Reason says why; a run that reaches its duration
	// or step limit gets its outcome after the last tick, in the Result.
	Outcome record.Outcome
	Reason  string
}

// Tap hands snapshots from the loop to one reader through three
// preallocated buffers (a triple buffer): the loop fills its own buffer and
// swaps it into the middle slot with one atomic operation; the reader
// swaps its buffer with the middle. Neither ever waits for the other, and
// a reader that falls behind sees the newest snapshot and misses the ones
// in between (counted by comparing Seq). Make one with NewTap; set it in
// Config.Tap.
type Tap struct {
	interval float64
	realtime bool

	// Loop side (one goroutine).
	back    *Snapshot
	next    float64   // simulated time the next snapshot is due
	seq     uint64    // last Seq made
	started time.Time // wall time of the first snapshot, for real-time pacing
	t0      float64

	middle atomic.Pointer[Snapshot]

	// Reader side (one goroutine).
	front   *Snapshot
	lastSeq uint64
}

// NewTap makes a tap that takes a snapshot every interval simulated
// seconds (≤ 0: DefaultTapInterval). With realtime set, a lockstep run is
// held back to the wall clock at each snapshot, so a person can watch it;
// a wall-clock run is paced by its clock anyway.
func NewTap(interval float64, realtime bool) *Tap {
	if !(interval > 0) || math.IsInf(interval, 0) {
		interval = DefaultTapInterval
	}
	t := &Tap{interval: interval, realtime: realtime, back: new(Snapshot), front: new(Snapshot), next: math.Inf(-1)}
	t.middle.Store(new(Snapshot))
	return t
}

// Interval is the simulated time between snapshots.
func (t *Tap) Interval() float64 { return t.interval }

// Latest copies the newest snapshot into dst and reports whether it is
// newer than the one the last call returned; missed is how many snapshots
// were made in between and never read. Call it from one goroutine.
func (t *Tap) Latest(dst *Snapshot) (ok bool, missed uint64) {
	t.front = t.middle.Swap(t.front)
	if t.front.Seq <= t.lastSeq {
		return false, 0
	}
	missed = t.front.Seq - t.lastSeq - 1
	t.lastSeq = t.front.Seq
	*dst = *t.front
	return true, missed
}

// Made is how many snapshots the loop has made; read it after the run.
func (t *Tap) Made() uint64 { return atomic.LoadUint64(&t.seq) }

// tapTick is called by the tick core after every tick; final says the run
// has ended, which always gives a snapshot so the reader sees the outcome.
func (r *runner) tapTick(p pacer, wall time.Time, final bool) {
	t := r.cfg.Tap
	pt := &r.pt
	if !final && pt.s.T < t.next {
		return
	}
	if math.IsInf(t.next, -1) {
		t.started, t.t0 = time.Now(), pt.s.T
		t.next = pt.s.T
	}
	for t.next <= pt.s.T {
		t.next += t.interval
	}
	s := t.back
	s.Seq = atomic.AddUint64(&t.seq, 1)
	s.Tick, s.T, s.Wall = pt.tick-1, pt.s.T, wall // advance has counted the tick
	s.NumQ = r.m.NumDOF()
	s.Q, s.V = pt.s.Q, pt.s.V
	s.Pose = r.m.Points(&pt.s)
	s.Joints = r.n
	sent := &r.sess.out.State
	for i := 0; i < r.n; i++ {
		s.Angle[i] = float64(sent.Angle[i])
		s.Commanded[i] = pt.commanded[i]
		s.Applied[i] = pt.in.Torque[i]
	}
	s.Feet = pt.res.Contacts
	s.Stance = pt.s.Stance
	s.LatencyUS, s.JitterUS = pt.latUS, nan
	if rp, ok := p.(*realPacer); ok && !wall.IsZero() {
		s.JitterUS = float64(wall.Sub(rp.due)) / 1e3
	}
	s.Steps = r.steps.count
	s.Fresh = r.fresh
	s.Ticks = uint64(pt.tick)
	s.DeadlineMisses = r.times.misses
	s.Resent = r.health.counts.Resends
	s.BadFrames = r.health.counts.BadFrames
	s.Outcome, s.Reason = r.end.outcome, r.end.reason
	t.back = t.middle.Swap(s)
	if t.realtime && r.cfg.Clock != Wallclock && !final {
		// Hold a lockstep run to the wall clock: simulated time since the
		// first snapshot may not run ahead of the real time since then.
		ahead := time.Duration((pt.s.T-t.t0)*1e9) - time.Since(t.started)
		if ahead > 0 {
			time.Sleep(ahead)
		}
	}
}
