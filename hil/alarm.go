package hil

import (
	"encoding/json"
	"math"
	"strconv"
	"sync/atomic"
	"time"

	"gaitrig/internal/nonfinite"
	"gaitrig/record"
)

// alarm is one alarm about to be logged.
type alarm struct {
	kind    string
	tick    int64
	t       float64
	foot    int // -1 none
	segment int // -1 none
	message string
	values  map[string]float64
}

// alarmer applies the alarm policy: it counts every occurrence of every
// kind, logs them to the record (rate-limited per kind for repeating kinds,
// never for a trip), forwards logged alarms to the sink, and remembers the
// first trip.
type alarmer struct {
	cfg        *Config
	rec        *record.Writer
	counts     map[string]int
	lastLogged map[string]float64
	suppressed map[string]int
	trip       *alarm
	tripKind   string
	logErr     error

	// The sink is fed through a queue and its own goroutine: publishing
	// over MQTT at QoS 1 waits for the broker, and the tick loop must not.
	sinkQ       chan []byte
	sinkDone    chan struct{}
	sinkFailed  atomic.Bool
	sinkDropped int
}

// sinkQueue is how many alarms may wait for the sink; more are dropped from
// the sink (never from the record) and counted.
const sinkQueue = 256

// sinkDrain is how long the end of a run waits for queued alarms to reach
// the sink.
const sinkDrain = 2 * time.Second

func newAlarmer(cfg *Config, rec *record.Writer) *alarmer {
	a := &alarmer{cfg: cfg, rec: rec, counts: map[string]int{},
		lastLogged: map[string]float64{}, suppressed: map[string]int{}}
	if cfg.Alarms != nil {
		a.sinkQ = make(chan []byte, sinkQueue)
		a.sinkDone = make(chan struct{})
		go a.publish(cfg.Alarms)
	}
	return a
}

// publish forwards queued alarms to the sink until the queue closes.
func (a *alarmer) publish(s AlarmSink) {
	defer close(a.sinkDone)
	for b := range a.sinkQ {
		if err := s.PublishAlarm(b); err != nil && !a.sinkFailed.Swap(true) && a.cfg.Log != nil {
			a.cfg.Log("alarm sink failed, alarms stay in the run record only: " + err.Error())
		}
	}
}

// close ends the sink queue and waits a bounded time for it to drain.
func (a *alarmer) close() {
	if a.sinkQ == nil {
		return
	}
	close(a.sinkQ)
	select {
	case <-a.sinkDone:
	case <-time.After(sinkDrain):
		if a.cfg.Log != nil {
			a.cfg.Log("alarm sink still busy after " + sinkDrain.String() + "; the run record holds every alarm")
		}
	}
	if a.sinkDropped > 0 && a.cfg.Log != nil {
		a.cfg.Log(strconv.Itoa(a.sinkDropped) + " alarms did not fit the sink queue; the run record holds every alarm")
	}
}

// occur counts one occurrence of kind at simulated time t and says whether
// it should be logged now. Trips are always logged; a warn kind is logged at
// most once per AlarmInterval, and the occurrences in between are reported
// with the next line. It does not allocate once the kind has been seen.
func (a *alarmer) occur(kind string, t float64) bool {
	a.counts[kind]++
	if a.cfg.severity(kind) == SeverityTrip {
		return true
	}
	if last, ok := a.lastLogged[kind]; ok && t-last < a.cfg.AlarmInterval {
		a.suppressed[kind]++
		return false
	}
	return true
}

// emit logs an alarm that occur allowed and reports whether it trips.
func (a *alarmer) emit(al alarm) bool {
	sev := a.cfg.severity(al.kind)
	a.lastLogged[al.kind] = al.t
	if n := a.suppressed[al.kind]; n > 0 {
		if al.values == nil {
			al.values = map[string]float64{}
		}
		al.values["repeats_not_logged"] = float64(n)
		a.suppressed[al.kind] = 0
	}
	rs := record.Warn
	if sev == SeverityTrip {
		rs = record.Trip
	}
	a.write(al, rs)
	if sev == SeverityTrip && a.trip == nil {
		c := al
		a.trip = &c
		a.tripKind = al.kind
		return true
	}
	return false
}

// raise is occur followed by emit with a message built only when needed.
func (a *alarmer) raise(kind string, tick int64, t float64, foot, segment int, msg func() (string, map[string]float64)) bool {
	if !a.occur(kind, t) {
		return false
	}
	m, v := msg()
	return a.emit(alarm{kind: kind, tick: tick, t: t, foot: foot, segment: segment, message: m, values: v})
}

// info logs an event that is not an alarm (heel strikes are not logged;
// e-stop, run end, scheduling class are).
func (a *alarmer) info(kind string, tick int64, t float64, message string, values map[string]float64) {
	a.write(alarm{kind: kind, tick: tick, t: t, foot: -1, segment: -1, message: message, values: values}, record.Info)
}

func (a *alarmer) write(al alarm, sev record.Severity) {
	ev := record.Event{Tick: al.tick, T: al.t, Wall: time.Now(), Kind: al.kind, Severity: sev,
		Message: al.message, Segment: record.NoSegment, Values: al.values}
	if al.segment >= 0 {
		ev.Segment = al.segment
	}
	if al.foot == 0 || al.foot == 1 {
		ev.Foot = record.FootNames[al.foot]
	}
	if a.rec != nil {
		if err := a.rec.Event(ev); err != nil && a.logErr == nil {
			a.logErr = err
		}
	}
	if a.sinkQ != nil && sev != record.Info {
		b, err := json.Marshal(sinkEvent(ev))
		if err != nil {
			return // cannot happen: sinkEvent holds only JSON-safe values
		}
		select {
		case a.sinkQ <- b:
		default:
			a.sinkDropped++
		}
	}
}

// sinkEvent is record.Event with non-finite values made JSON-safe: JSON has
// no NaN or Inf, so they travel as strings.
func sinkEvent(ev record.Event) any {
	type out struct {
		record.Event
		Values map[string]any `json:"values,omitempty"`
	}
	o := out{Event: ev}
	if len(ev.Values) > 0 {
		o.Values = map[string]any{}
		for k, v := range ev.Values {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				o.Values[k] = nonfinite.Word(v)
			} else {
				o.Values[k] = v
			}
		}
	}
	o.Event.Values = nil
	return o
}
