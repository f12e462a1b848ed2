package rig

// This file owns the rig's decoded telemetry on MQTT: a goroutine that
// reads the loop's tap a few times a second and publishes a
// topics.RigTelemetry document on the link, off the tick path.

import (
	"encoding/json"
	"math"
	"sync"
	"time"

	"gaitrig/bridges/topics"
	"gaitrig/hil"
	"gaitrig/plant"
	"gaitrig/record"
)

// telemetryPublisher is a link that publishes telemetry for observers (the
// MQTT link).
type telemetryPublisher interface {
	PublishTelemetry(doc []byte) error
}

// telemetry publishes the run's telemetry while it goes.
type telemetry struct {
	pub      telemetryPublisher
	rd       *hil.TapReader
	scenario string
	clock    string
	stop     chan struct{}
	wg       sync.WaitGroup
	snap     hil.Snapshot
	have     bool
	failed   bool
	log      func(string)
}

func (t *telemetry) start() {
	t.stop = make(chan struct{})
	t.wg.Add(1)
	go func() {
		defer t.wg.Done()
		tick := time.NewTicker(topics.TelemetryInterval)
		defer tick.Stop()
		for {
			select {
			case <-t.stop:
				return
			case <-tick.C:
				t.publish(nil)
			}
		}
	}()
}

// finish stops the goroutine and publishes the last document with the
// run's outcome (sum nil: the run could not be carried out).
func (t *telemetry) finish(sum *record.Summary) {
	close(t.stop)
	t.wg.Wait()
	if sum == nil {
		sum = &record.Summary{Outcome: record.Aborted}
	}
	t.publish(sum)
}

func (t *telemetry) publish(sum *record.Summary) {
	if ok, _ := t.rd.Latest(&t.snap); ok {
		t.have = true
	}
	doc := telemetryDoc(t.scenario, t.clock, &t.snap, t.have, sum)
	b, err := json.Marshal(doc)
	if err == nil {
		err = t.pub.PublishTelemetry(b)
	}
	if err != nil && !t.failed && t.log != nil {
		// Said once: the record is the authority, the topic is for watching.
		t.failed = true
		t.log("telemetry topic: " + err.Error() + " (the run goes on; its record is complete)")
	}
}

// finite is v, or nil when v is not finite (null in JSON).
func finite(v float64) *float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return &v
}

func point(p [2]float64) [2]*float64 { return [2]*float64{finite(p[0]), finite(p[1])} }

// telemetryDoc is the document of snapshot s (have: one was taken) and,
// at the end, the summary.
func telemetryDoc(scenario, clock string, s *hil.Snapshot, have bool, sum *record.Summary) topics.RigTelemetry {
	d := topics.RigTelemetry{Scenario: scenario, Clock: clock, State: "greeting"}
	if s.FirmwareName != "" {
		d.Firmware = s.FirmwareName + " " + s.FirmwareBuild
	}
	if have {
		d.State = "running"
		d.TimeS, d.Ticks, d.Steps = finite(s.T), int64(s.Ticks), s.Steps
		for _, a := range s.Alarms[:s.NumAlarmKinds] {
			d.Alarms += int(a.N)
		}
		d.Hip, d.TorsoTop = point(s.Pose.Hip), point(s.Pose.TorsoTop)
		for i := 0; i < 2; i++ {
			d.Feet[i] = point(s.Pose.Foot[i])
			d.NormalN[i] = finite(s.Feet[i].Normal)
			u := s.Feet[i].Utilization
			if s.Feet[i].Mode == plant.Free {
				u = math.NaN() // off the ground: no utilization
			}
			d.Utilization[i] = finite(u)
		}
		d.LatencyUS = finite(s.LatencyUS)
		if s.Outcome == record.Tripped {
			d.State = "tripped"
		}
	}
	if sum != nil {
		d.State, d.Outcome, d.Reason = "done", string(sum.Outcome), sum.Reason
		d.Steps, d.Ticks = sum.Steps, sum.Ticks
		d.TimeS = finite(sum.SimTimeS)
	}
	return d
}
