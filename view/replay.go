package view

// This file owns the replay: a recorded run played into the same page,
// with pause, speed and seek.

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"net/http"
	"sort"
	"sync"
	"time"

	"gaitrig/plant"
	"gaitrig/record"
)

// Limits of a replay.
const (
	// ReplayRate is how many frames per second of run time a replay keeps
	// from the telemetry (the same rate a live run sends).
	ReplayRate = 50
	// maxReplayFrames bounds the frames a replay holds; a longer run is
	// thinned further (about 28 hours at 50 per second).
	maxReplayFrames = 5_000_000
	// MinSpeed and MaxSpeed bound the playback speed.
	MinSpeed, MaxSpeed float64 = 0.05, 50
	// playEvery is how often the playback advances, wall time.
	playEvery = 20 * time.Millisecond
)

// Recording is a run folder read for playback.
type Recording struct {
	// Setup is what the page draws from.
	Setup Setup
	// Notes say what was incomplete in the folder.
	Notes []string

	frames []frame // time order
	steps  []stepMsg
	alarms []alarmMsg
	end    float64
	sum    *record.Summary
}

// LoadRecording reads the run folder dir: its manifest (the walker and
// terrain to draw), telemetry thinned to ReplayRate, steps and events.
func LoadRecording(dir string) (*Recording, error) {
	run, err := record.Open(dir)
	if err != nil {
		return nil, err
	}
	mf := &run.Manifest
	if mf.Plant == nil {
		return nil, fmt.Errorf("replay %s: the manifest has no plant block (a schema 1 folder); the walker cannot be drawn", dir)
	}
	m, err := plant.New(mf.Plant.Params(), plant.Options{})
	if err != nil {
		return nil, fmt.Errorf("replay %s: the manifest's plant: %w", dir, err)
	}
	rec := &Recording{Notes: run.Notes, sum: run.Summary}
	g := mf.Greeting
	rec.Setup = Setup{Mode: "replay", Scenario: mf.Scenario, Clock: mf.Clock, Link: mf.Link, TickHz: mf.TickHz, Joints: mf.JointNames,
		Plant: mf.Plant, Greeting: &g, Caution: record.Caution}
	stride := int64(1)
	if mf.TickHz > ReplayRate {
		stride = int64(math.Round(mf.TickHz / ReplayRate))
	}
	tr, err := run.Ticks()
	if err != nil {
		return nil, err
	}
	for _, s := range run.Steps {
		rec.steps = append(rec.steps, stepMsg{Type: "step", Index: s.Index, DurationS: num(s.DurationS), LengthM: num(s.LengthM),
			SpeedMPS: num(s.SpeedMPS), PeakUtil: num(s.PeakUtilization), MinNormal: num(s.MinNormalN), EndS: num(s.EndS)})
	}
	for _, e := range run.Events {
		rec.alarms = append(rec.alarms, alarmMsg{Type: "alarm", Tick: e.Tick, T: num(e.T), Kind: e.Kind, Severity: string(e.Severity),
			Message: e.Message, Foot: e.Foot})
	}
	joints := len(mf.JointNames)
	steps := 0
	var lastRow record.Tick
	have := false
	for tr.Next() {
		row := tr.Tick()
		lastRow, have = *row, true
		if row.Index%stride != 0 {
			continue
		}
		for steps < len(rec.steps) && float64(rec.steps[steps].EndS) <= row.T {
			steps++
		}
		rec.frames = append(rec.frames, frameOfRow(m, row, joints, steps))
		if len(rec.frames) > maxReplayFrames {
			return nil, fmt.Errorf("replay %s: more than %d frames at %d per second; the run is too long to play back", dir, maxReplayFrames, ReplayRate)
		}
	}
	if err := tr.Err(); err != nil {
		return nil, err
	}
	if have && (len(rec.frames) == 0 || rec.frames[len(rec.frames)-1].Tick != lastRow.Index) {
		rec.frames = append(rec.frames, frameOfRow(m, &lastRow, joints, len(rec.steps)))
	}
	if len(rec.frames) == 0 {
		return nil, fmt.Errorf("replay %s: telemetry.csv has no rows to play", dir)
	}
	rec.end = float64(rec.frames[len(rec.frames)-1].T)
	rec.Setup.DurationS = rec.end
	return rec, nil
}

// player is the playback state of a replay.
type player struct {
	mu     sync.Mutex
	rec    *Recording
	t      float64 // position, simulated s
	speed  float64
	paused bool
	moved  bool // a seek happened: resend the tables up to t
	sent   int  // frames sent up to index sent-1
	steps  int  // steps sent
	alarms int  // alarms sent
}

// Play plays rec into s from the start at speed 1 until Close; the page's
// controls pause, change speed and seek.
func (s *Server) Play(rec *Recording) {
	p := &player{rec: rec, speed: 1}
	s.control.Store(&controlFunc{p.control})
	s.hub.send(kState, encode(stateMsg{Type: "state", State: "replay", Outcome: outcomeOf(rec.sum), Reason: reasonOf(rec.sum)}))
	for _, n := range rec.Notes {
		s.hub.send(kNote, encode(noteMsg{Type: "note", Text: n}))
	}
	s.bg.Add(1)
	go func() {
		defer s.bg.Done()
		tick := time.NewTicker(playEvery)
		defer tick.Stop()
		lastWall := time.Now()
		for {
			select {
			case <-s.closed:
				return
			case now := <-tick.C:
				p.advance(s, now.Sub(lastWall).Seconds())
				lastWall = now
			}
		}
	}()
}

func outcomeOf(s *record.Summary) string {
	if s == nil {
		return ""
	}
	return string(s.Outcome)
}

func reasonOf(s *record.Summary) string {
	if s == nil {
		return "the run folder has no summary: the run was killed or is still going"
	}
	return s.Reason
}

// advance moves the position by dt wall seconds and sends what it passed.
func (p *player) advance(s *Server, dt float64) {
	p.mu.Lock()
	defer p.mu.Unlock()
	r := p.rec
	if !p.paused {
		p.t = math.Min(p.t+dt*p.speed, r.end)
	}
	refill := p.moved
	if p.moved {
		p.moved = false
		s.hub.send(kReset, encode(struct {
			Type string `json:"type"`
		}{"reset"}))
		p.steps, p.alarms = 0, 0
		// Refill the charts with the window before the new position.
		p.sent = sort.Search(len(r.frames), func(i int) bool { return float64(r.frames[i].T) > p.t-10 })
	}
	// Frames up to t; at high speed only every few, so a page gets at most
	// about twice the frame rate of a live run.
	upTo := sort.Search(len(r.frames), func(i int) bool { return float64(r.frames[i].T) > p.t })
	if n := upTo - p.sent; n > 0 {
		every := 1 + n/3
		if refill {
			// About 120 frames refill 10 s of chart and fit a viewer's queue.
			every = max(1, n/120)
		}
		for i := p.sent; i < upTo; i++ {
			if (upTo-1-i)%every == 0 {
				s.hub.send(kFrame, encode(r.frames[i]))
			}
		}
		p.sent = upTo
	}
	for p.steps < len(r.steps) && float64(r.steps[p.steps].EndS) <= p.t {
		s.hub.send(kStep, encode(r.steps[p.steps]))
		p.steps++
	}
	for p.alarms < len(r.alarms) && float64(r.alarms[p.alarms].T) <= p.t {
		s.hub.send(kAlarm, encode(r.alarms[p.alarms]))
		p.alarms++
	}
	s.hub.send(kPlay, encode(playMsg{Type: "play", T: num(p.t), End: num(r.end), Speed: p.speed, Paused: p.paused}))
}

func (p *player) control(c controlReq) error {
	p.mu.Lock()
	defer p.mu.Unlock()
	if c.Speed != nil {
		v := *c.Speed
		if !(v >= MinSpeed && v <= MaxSpeed) {
			return fmt.Errorf("speed %g: want %g to %g", v, MinSpeed, MaxSpeed)
		}
		p.speed = v
	}
	if c.Seek != nil {
		v := *c.Seek
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return errors.New("seek: want a time in seconds")
		}
		p.t = math.Max(0, math.Min(v, p.rec.end))
		p.moved = true
	}
	if c.Pause != nil {
		p.paused = *c.Pause
	}
	return nil
}

// maxControlBody bounds a control request.
const maxControlBody = 1 << 10

// decodeSmall reads a small JSON body strictly.
func decodeSmall(r *http.Request, v any) error {
	dec := json.NewDecoder(io.LimitReader(r.Body, maxControlBody))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		return fmt.Errorf("control: want a JSON object with pause, speed or seek (at most %d bytes): %v", maxControlBody, err)
	}
	return nil
}
