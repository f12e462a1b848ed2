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
	T    float64 // simulated time at the end of Tick, s
	// Wall is the wall time the tick started (zero in lockstep).
	Wall time.Time
	// NumQ generalized coordinates are valid in Q and V (plant order).
	NumQ int
	Q, V [plant.MaxDOF]float64 // generalized coordinates and velocities; the first NumQ are valid
	// Pose are the stick-figure points of the walker.
	Pose plant.Pose
	// Joints joint values are valid in Angle (as sent to the firmware,
	// rad), Commanded and Applied (N·m).
	Joints                    int
	Angle, Commanded, Applied [protocol.MaxJoints]float64 // per joint, JointNames order; the first Joints are valid
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
	// Latency and Jitter are the round trips and tick start lateness of
	// every tick so far, in the coarse buckets of TapBucketsUS (wall-clock
	// runs; empty in lockstep).
	Latency, Jitter TapHistogram
	// FrameKinds counts rejected frames per kind of rejection; the first
	// NumFrameKinds entries are set.
	FrameKinds    [tapKinds]KindCount
	NumFrameKinds int // how many entries of FrameKinds are set
	// Alarms counts alarm occurrences per kind (logged or not) with the
	// kind's severity; the first NumAlarmKinds entries are set.
	Alarms        [tapKinds]AlarmCount
	NumAlarmKinds int // how many entries of Alarms are set
	// FirmwareName and FirmwareBuild are the firmware's greeting.
	FirmwareName, FirmwareBuild string
	// Outcome is set once the loop has ended the run early (a trip, a
	// failure, an abort), Reason says why; a run that reaches its duration
	// or step limit gets its outcome after the last tick, in the Result.
	Outcome record.Outcome
	Reason  string // why the loop ended the run; empty while it runs
}

// tapKinds bounds the kinds a snapshot counts apart (frame rejections,
// alarm kinds); the vocabularies are smaller.
const tapKinds = 32

// TapBucketsUS are the upper bounds, µs, of the buckets of TapHistogram:
// from well under a tick to 20 ms, the range a 1 kHz loop cares about.
var TapBucketsUS = [...]float64{50, 100, 200, 300, 500, 750, 1000, 1500, 2000, 3000, 5000, 10000, 20000}

// TapHistogram counts durations in the buckets of TapBucketsUS; Counts[i]
// holds those ≤ TapBucketsUS[i] and above the bound before, the last
// entry those above every bound.
type TapHistogram struct {
	Counts [len(TapBucketsUS) + 1]uint64 // durations per bucket, as the type's doc says
	Count  uint64                        // durations counted, the sum of Counts
	SumUS  float64                       // sum of the durations counted, µs
}

func (h *TapHistogram) add(us float64) {
	i := 0
	for i < len(TapBucketsUS) && us > TapBucketsUS[i] {
		i++
	}
	h.Counts[i]++
	h.Count++
	h.SumUS += us
}

// KindCount is a count of one kind.
type KindCount struct {
	Kind string // the kind's name
	N    uint64 // how many of that kind so far
}

// AlarmCount is how often one alarm kind occurred, and its severity.
type AlarmCount struct {
	Kind     string   // the alarm kind (hil.Alarm… constants)
	Severity Severity // the severity the run gives the kind
	N        uint64   // occurrences so far, logged or not
}

// Tap hands snapshots from the loop to its readers. Each reader has three
// preallocated buffers (a triple buffer): the loop fills its own buffer and
// swaps it into the middle slot with one atomic operation; the reader
// swaps its buffer with the middle. Neither ever waits for the other, and
// a reader that falls behind sees the newest snapshot and misses the ones
// in between (counted by comparing Seq). Make one with NewTap, add its
// readers with NewReader, then set it in Config.Tap.
type Tap struct {
	interval float64
	realtime bool

	// Loop side (one goroutine).
	snap    Snapshot // built here, copied to each reader
	next    float64  // simulated time the next snapshot is due
	seq     atomic.Uint64
	started time.Time // wall time of the first snapshot, for real-time pacing
	t0      float64
	readers []*TapReader
}

// TapReader is one reader of a Tap; use it from one goroutine.
type TapReader struct {
	back    *Snapshot // the loop's
	middle  atomic.Pointer[Snapshot]
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
	return &Tap{interval: interval, realtime: realtime, next: math.Inf(-1)}
}

// NewReader adds a reader. Add every reader before the run starts: the
// loop reads the list without a lock.
func (t *Tap) NewReader() *TapReader {
	r := &TapReader{back: new(Snapshot), front: new(Snapshot)}
	r.middle.Store(new(Snapshot))
	t.readers = append(t.readers, r)
	return r
}

// Interval is the simulated time between snapshots.
func (t *Tap) Interval() float64 { return t.interval }

// Latest copies the newest snapshot into dst and reports whether it is
// newer than the one the last call returned; missed is how many snapshots
// were made in between and never read.
func (r *TapReader) Latest(dst *Snapshot) (ok bool, missed uint64) {
	r.front = r.middle.Swap(r.front)
	if r.front.Seq <= r.lastSeq {
		return false, 0
	}
	missed = r.front.Seq - r.lastSeq - 1
	r.lastSeq = r.front.Seq
	*dst = *r.front
	return true, missed
}

// Made is how many snapshots the loop has made.
func (t *Tap) Made() uint64 { return t.seq.Load() }

// tap is called by the tick core after every tick, once the tick's
// deadline miss is counted; final says the run has ended, which always
// gives a snapshot so the readers see the last tick.
func (r *runner) tap(p pacer, wall time.Time, final bool) {
	t := r.cfg.Tap
	if t == nil {
		return
	}
	pt := &r.pt
	jitter := nan
	if rp, ok := p.(*realPacer); ok && !wall.IsZero() {
		jitter = float64(wall.Sub(rp.due)) / 1e3
	}
	// The histograms count every tick, not only the snapshot ticks.
	if !math.IsNaN(pt.latUS) {
		t.snap.Latency.add(pt.latUS)
	}
	if !math.IsNaN(jitter) {
		t.snap.Jitter.add(math.Max(0, jitter))
	}
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
	s := &t.snap
	s.Seq = t.seq.Add(1)
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
	s.LatencyUS, s.JitterUS = pt.latUS, jitter
	s.Steps = r.steps.count
	s.Fresh = r.fresh
	s.Ticks = uint64(pt.tick)
	s.DeadlineMisses = r.times.misses
	s.Resent = r.health.counts.Resends
	s.BadFrames = r.health.counts.BadFrames
	s.NumFrameKinds = 0
	for k, n := range r.health.frameKinds {
		if s.NumFrameKinds < tapKinds {
			s.FrameKinds[s.NumFrameKinds] = KindCount{k, n}
			s.NumFrameKinds++
		}
	}
	s.NumAlarmKinds = 0
	for k, n := range r.al.counts {
		if s.NumAlarmKinds < tapKinds {
			s.Alarms[s.NumAlarmKinds] = AlarmCount{k, r.cfg.severity(k), uint64(n)}
			s.NumAlarmKinds++
		}
	}
	s.FirmwareName, s.FirmwareBuild = r.sess.greeting.Name, r.sess.greeting.Build
	s.Outcome, s.Reason = r.end.outcome, r.end.reason
	for _, rd := range t.readers {
		*rd.back = *s
		rd.back = rd.middle.Swap(rd.back)
	}
	if t.realtime && r.cfg.Clock != Wallclock && !final {
		// Hold a lockstep run to the wall clock: simulated time since the
		// first snapshot may not run ahead of the real time since then.
		ahead := time.Duration((pt.s.T-t.t0)*1e9) - time.Since(t.started)
		if ahead > 0 {
			time.Sleep(ahead)
		}
	}
}
