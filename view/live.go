package view

// This file owns the live feed: what the loop hands over (snapshots
// through the tap, steps through a lock-free ring, alarms and notes
// through another) and the goroutine that turns them into messages.

import (
	"encoding/json"
	"fmt"
	"math"
	"sync/atomic"
	"time"

	"gaitrig/hil"
	"gaitrig/record"
)

// pollEvery is how often the server looks for a new snapshot: four times
// the rate of a run paced to real time, so few of its frames are skipped
// when the host is busy.
const pollEvery = 5 * time.Millisecond

// Live is the feed of one running loop into a Server. Make it with
// NewLive before the run, set its tap in the loop's configuration, Step in
// its step callback, Note in its log and the Live itself as an alarm sink
// (hil.AlarmSink); Start it on a Server, and call Finish with the run's
// result.
type Live struct {
	s   *Server
	tap *hil.TapReader

	steps stepRing
	texts textRing

	finish chan stateMsg
	done   chan struct{}
}

// NewLive makes the feed of a run that reads tap (as a reader of its own,
// so call it before the run starts).
func NewLive(tap *hil.Tap) *Live {
	return &Live{tap: tap.NewReader(), finish: make(chan stateMsg, 1), done: make(chan struct{})}
}

// Start feeds s from the run; call it once. What the loop handed over
// before is kept (within the rings' sizes) and sent.
func (l *Live) Start(s *Server) {
	l.s = s
	s.bg.Add(1)
	go l.run()
}

// Step takes a completed step. It runs on the loop: it neither allocates
// nor locks, and a step the server has not read within stepRingSize steps
// is lost to the page (counted in a note), never waited for.
func (l *Live) Step(si hil.StepInfo) { l.steps.put(si) }

// PublishAlarm takes one alarm object as the loop's alarm sink gives it
// (from the loop's alarm goroutine, not the tick path).
func (l *Live) PublishAlarm(obj []byte) error {
	l.texts.put(textAlarm, obj)
	return nil
}

// Note takes a plain sentence about the run (handshake, link).
func (l *Live) Note(line string) { l.texts.put(textNote, []byte(line)) }

// Finish shows the run's end: outcome and summary. It waits until the
// page has been sent everything the loop handed over.
func (l *Live) Finish(sum *record.Summary, runDir string) {
	if l.s == nil {
		return
	}
	st := stateMsg{Type: "state", State: "done"}
	if sum != nil {
		st.Outcome, st.Reason = string(sum.Outcome), sum.Reason
		st.Summary = &summaryMsg{Steps: sum.Steps, Ticks: sum.Ticks, SimTimeS: num(sum.SimTimeS),
			PeakUtil: num(sum.PeakFrictionUtilization), MinNorm: num(sum.MinNormalForceN), Speed: num(sum.MeanSpeedMPS), RunDir: runDir}
	}
	select {
	case l.finish <- st:
	default:
	}
	select {
	case <-l.done:
	case <-l.s.closed:
	}
}

func (l *Live) run() {
	defer l.s.bg.Done()
	defer close(l.done)
	tick := time.NewTicker(pollEvery)
	defer tick.Stop()
	var snap hil.Snapshot
	var skipped uint64
	state, firmware := "greeting", ""
	var stepsSeen, stepsLost int
	for {
		var final *stateMsg
		select {
		case <-l.s.closed:
			return
		case st := <-l.finish:
			final = &st
		case <-tick.C:
		}
		// Texts first: the greeting note comes before the first frame.
		l.texts.drain(func(k textKind, b []byte) {
			switch k {
			case textNote:
				l.s.hub.send(kNote, encode(noteMsg{Type: "note", Text: string(b)}))
			case textAlarm:
				l.s.hub.send(kAlarm, encode(alarmOf(b)))
			}
		}, func(lost uint64) {
			l.s.hub.send(kNote, encode(noteMsg{Type: "note", Text: fmt.Sprintf("%d alarms or notes came faster than the view could read them and are not shown (the run's events.jsonl has them all)", lost)}))
		})
		lost := l.steps.drain(func(si hil.StepInfo) {
			stepsSeen++
			l.s.hub.send(kStep, encode(stepOfInfo(si)))
		})
		if lost > 0 {
			stepsLost += int(lost)
			l.s.hub.send(kNote, encode(noteMsg{Type: "note", Text: fmt.Sprintf("%d steps came faster than the view could read them and are not shown (steps.csv has them all)", lost)}))
		}
		if ok, missed := l.tap.Latest(&snap); ok {
			skipped += missed
			if firmware == "" && snap.FirmwareName != "" {
				firmware = fmt.Sprintf("firmware %q build %q", snap.FirmwareName, snap.FirmwareBuild)
				state = "" // send the state again, with the firmware
			}
			l.s.hub.send(kFrame, encode(frameOfSnapshot(&snap, skipped)))
			want := "running"
			if snap.Outcome == record.Tripped {
				want = "tripped"
			} else if snap.Outcome != "" {
				want = "ended"
			}
			if want != state {
				state = want
				l.s.hub.send(kState, encode(stateMsg{Type: "state", State: state, Outcome: string(snap.Outcome), Reason: snap.Reason, Firmware: firmware}))
			}
		}
		if final != nil {
			final.Firmware = firmware
			l.s.hub.send(kState, encode(*final))
			return
		}
	}
}

// alarmOf reads the alarm object the loop's sink gives (the events.jsonl
// line; non-finite values are strings there, and only the fields shown
// are read).
func alarmOf(obj []byte) alarmMsg {
	var e struct {
		Tick     int64           `json:"tick"`
		T        json.RawMessage `json:"t_s"`
		Kind     string          `json:"kind"`
		Severity string          `json:"severity"`
		Message  string          `json:"message"`
		Foot     string          `json:"foot"`
	}
	if err := json.Unmarshal(obj, &e); err != nil {
		return alarmMsg{Type: "alarm", Kind: "unreadable", Severity: "warn", T: num(math.NaN()),
			Message: "the view could not read an alarm (" + err.Error() + "); events.jsonl has it"}
	}
	var t float64
	if json.Unmarshal(e.T, &t) != nil {
		t = math.NaN()
	}
	return alarmMsg{Type: "alarm", Tick: e.Tick, T: num(t), Kind: e.Kind, Severity: e.Severity, Message: e.Message, Foot: e.Foot}
}

// stepRingSize is how many steps may wait for the server: minutes of
// walking at two steps a second, far more than a 10 ms poll ever meets.
const stepRingSize = 256

// stepRing carries steps from the loop to the server without locks or
// allocation: one writer, one reader, each slot guarded by a sequence
// number (a seqlock made of atomics, so the race detector and the memory
// model agree that a torn slot is seen and skipped, never used).
type stepRing struct {
	head  atomic.Uint64 // steps written
	tail  uint64        // steps read (reader only)
	slots [stepRingSize]stepSlot
}

type stepSlot struct {
	seq  atomic.Uint64 // 0 while being written, else the step's number in the ring + 1
	vals [8]atomic.Uint64
}

func (r *stepRing) put(si hil.StepInfo) {
	h := r.head.Load()
	sl := &r.slots[h%stepRingSize]
	sl.seq.Store(0)
	sl.vals[0].Store(uint64(si.Index))
	sl.vals[1].Store(math.Float64bits(si.DurationS))
	sl.vals[2].Store(math.Float64bits(si.LengthM))
	sl.vals[3].Store(math.Float64bits(si.SpeedMPS))
	sl.vals[4].Store(math.Float64bits(si.PeakUtil))
	sl.vals[5].Store(math.Float64bits(si.MinNormal))
	sl.vals[6].Store(math.Float64bits(si.SimTimeS))
	sl.vals[7].Store(math.Float64bits(si.EndS))
	sl.seq.Store(h + 1)
	r.head.Store(h + 1)
}

// drain hands every step written since the last drain to f and returns how
// many were overwritten before they could be read.
func (r *stepRing) drain(f func(hil.StepInfo)) (lost uint64) {
	h := r.head.Load()
	if h-r.tail > stepRingSize {
		lost = h - r.tail - stepRingSize
		r.tail = h - stepRingSize
	}
	for ; r.tail < h; r.tail++ {
		sl := &r.slots[r.tail%stepRingSize]
		var v [8]uint64
		s1 := sl.seq.Load()
		for i := range v {
			v[i] = sl.vals[i].Load()
		}
		if s1 != r.tail+1 || sl.seq.Load() != s1 {
			lost++ // overwritten while read
			continue
		}
		f(hil.StepInfo{Index: int(v[0]), DurationS: math.Float64frombits(v[1]), LengthM: math.Float64frombits(v[2]),
			SpeedMPS: math.Float64frombits(v[3]), PeakUtil: math.Float64frombits(v[4]), MinNormal: math.Float64frombits(v[5]),
			SimTimeS: math.Float64frombits(v[6]), EndS: math.Float64frombits(v[7])})
	}
	return lost
}

type textKind uint8

const (
	textNote textKind = iota
	textAlarm
)

// textRingSize is how many alarms and notes may wait for the server. The
// loop's alarm policy already spaces repeated alarms out (AlarmInterval).
const textRingSize = 512

// textRing carries alarms and notes to the server: each entry is published
// with one atomic pointer store, so neither side locks. Writers are the
// alarm goroutine and the loop's note path (which already allocates the
// sentence); a counter in each entry tells the reader which it holds.
type textRing struct {
	head  atomic.Uint64
	tail  uint64
	slots [textRingSize]atomic.Pointer[textEntry]
}

type textEntry struct {
	n    uint64
	kind textKind
	b    []byte
}

func (r *textRing) put(k textKind, b []byte) {
	n := r.head.Add(1) - 1
	r.slots[n%textRingSize].Store(&textEntry{n: n, kind: k, b: b})
}

func (r *textRing) drain(f func(textKind, []byte), lostf func(uint64)) {
	h := r.head.Load()
	var lost uint64
	if h-r.tail > textRingSize {
		lost = h - r.tail - textRingSize
		r.tail = h - textRingSize
	}
	for ; r.tail < h; r.tail++ {
		e := r.slots[r.tail%textRingSize].Load()
		if e == nil || e.n < r.tail {
			// Reserved but not yet stored: read it next time.
			break
		}
		if e.n > r.tail {
			lost++
			continue
		}
		f(e.kind, e.b)
	}
	if lost > 0 {
		lostf(lost)
	}
}
