package view

// This file owns what goes over the wire: the JSON messages of the event
// stream, one type per message kind, and the number type that writes a
// non-finite value as null (JSON has no NaN).

import (
	"encoding/json"
	"math"
	"strconv"

	"gaitrig/hil"
	"gaitrig/plant"
	"gaitrig/record"
)

// num is a float64 that encodes NaN and ±Inf as null.
type num float64

// MarshalJSON writes the shortest representation, or null when not finite.
func (n num) MarshalJSON() ([]byte, error) {
	f := float64(n)
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return []byte("null"), nil
	}
	return strconv.AppendFloat(nil, f, 'g', -1, 64), nil
}

// Setup is what a page needs once, before any frame: the walker and its
// ground to draw, the joint names, and what is being watched.
type Setup struct {
	// Mode is "live" or "replay".
	Mode string `json:"mode"`
	// Scenario is the scenario's name; Clock lockstep or wallclock.
	Scenario string `json:"scenario"`
	Clock    string `json:"clock"` // lockstep or wallclock
	// Link names the link to the firmware as the run folder's manifest
	// does (builtin, a pty, mqtt:embedded (…), mqtt:tcp://…); "" when not
	// known.
	Link string `json:"link,omitempty"`
	// TickHz is the control rate.
	TickHz float64 `json:"tick_hz"`
	// DurationS is the run's simulated length when known (a replay, a
	// run with a duration), else 0.
	DurationS float64 `json:"duration_s"`
	// Joints are the joint names, in the order of the joint values.
	Joints []string `json:"joints"`
	// Plant is the walker and its terrain in the manifest's schema.
	Plant *record.Plant `json:"plant"`
	// Greeting is the firmware's greeting when known (a replay).
	Greeting *record.Greeting `json:"greeting,omitempty"`
	// Caution is the safety caution every page carries.
	Caution string `json:"caution"`
}

// footFrame is one foot in a frame.
type footFrame struct {
	Mode        string `json:"mode"` // free, rolling, sliding
	Normal      num    `json:"n"`    // N
	Tangential  num    `json:"ft"`   // N, positive forward along the ground
	Utilization num    `json:"u"`    // |F_t|/(μ_s N)
	ContactX    num    `json:"px"`   // x of the contact point, m
}

// frame is the walker and the loop at one tick.
type frame struct {
	Type      string       `json:"type"` // "frame"
	Seq       uint64       `json:"seq"`
	Tick      int64        `json:"tick"`
	T         num          `json:"t"`
	Hip       [2]num       `json:"hip"`
	Foot      [2][2]num    `json:"foot"`  // end of each leg axis
	Arc       [2][2]num    `json:"arc"`   // centre of each foot arc
	TorsoTop  [2]num       `json:"torso"` // equals Hip without a torso
	Knee      [2][2]num    `json:"knee"`  // knee of a kneed leg (the middle of a straight leg's axis)
	Angle     []num        `json:"angle"` // joint angles as sent, rad
	Commanded []num        `json:"cmd"`   // N·m
	Applied   []num        `json:"app"`   // N·m
	Feet      [2]footFrame `json:"feet"`
	Stance    int          `json:"stance"`
	LatencyUS num          `json:"lat_us"`
	JitterUS  num          `json:"jit_us"`
	Steps     int          `json:"steps"`
	Ticks     uint64       `json:"ticks"`
	Misses    uint64       `json:"misses"`
	Resent    uint64       `json:"resent"`
	BadFrames uint64       `json:"bad_frames"`
	Skipped   uint64       `json:"skipped"` // snapshots the server did not read (the loop ran faster than it polled)
}

func nums(dst []num, src []float64) []num {
	dst = dst[:0]
	for _, v := range src {
		dst = append(dst, num(v))
	}
	return dst
}

func pt(p [2]float64) [2]num { return [2]num{num(p[0]), num(p[1])} }

// setPose fills the drawing points from a pose.
func (f *frame) setPose(p *plant.Pose) {
	f.Hip, f.TorsoTop = pt(p.Hip), pt(p.TorsoTop)
	for i := 0; i < 2; i++ {
		f.Foot[i], f.Arc[i], f.Knee[i] = pt(p.Foot[i]), pt(p.ArcCentre[i]), pt(p.Knee[i])
	}
}

// frameOfSnapshot is the frame of a live snapshot.
func frameOfSnapshot(s *hil.Snapshot, skipped uint64) frame {
	f := frame{Type: "frame", Seq: s.Seq, Tick: s.Tick, T: num(s.T), Stance: s.Stance,
		LatencyUS: num(s.LatencyUS), JitterUS: num(s.JitterUS), Steps: s.Steps, Ticks: s.Ticks,
		Misses: s.DeadlineMisses, Resent: s.Resent, BadFrames: s.BadFrames, Skipped: skipped}
	f.setPose(&s.Pose)
	f.Angle = nums(nil, s.Angle[:s.Joints])
	f.Commanded = nums(nil, s.Commanded[:s.Joints])
	f.Applied = nums(nil, s.Applied[:s.Joints])
	for i, c := range s.Feet {
		f.Feet[i] = footFrame{Mode: c.Mode.String(), Normal: num(c.Normal), Tangential: num(c.Tangential),
			Utilization: num(c.Utilization), ContactX: num(c.Point[0])}
	}
	return f
}

// frameOfRow is the frame of a recorded telemetry row; m draws the pose
// from the row's coordinates.
func frameOfRow(m *plant.Model, row *record.Tick, joints int, steps int) frame {
	f := frame{Type: "frame", Seq: uint64(row.Index) + 1, Tick: row.Index, T: num(row.T), Stance: row.Stance,
		LatencyUS: num(row.LatencyUS), JitterUS: num(math.NaN()), Steps: steps, Ticks: uint64(row.Index) + 1}
	var s plant.State
	n := m.NumDOF()
	copy(s.Q[:n], row.Q[:n])
	p := m.Points(&s)
	f.setPose(&p)
	f.Angle = nums(nil, row.Angle[:joints])
	f.Commanded = nums(nil, row.Commanded[:joints])
	f.Applied = nums(nil, row.Applied[:joints])
	for i, c := range row.Feet {
		f.Feet[i] = footFrame{Mode: plant.ContactMode(c.Mode).String(), Normal: num(c.NormalN), Tangential: num(c.TangentialN),
			Utilization: num(c.Utilization), ContactX: num(c.ContactX)}
	}
	return f
}

// stepMsg is one row of the step table.
type stepMsg struct {
	Type      string `json:"type"` // "step"
	Index     int    `json:"index"`
	DurationS num    `json:"duration_s"`
	LengthM   num    `json:"length_m"`
	SpeedMPS  num    `json:"speed_mps"`
	PeakUtil  num    `json:"peak_utilization"`
	MinNormal num    `json:"min_normal_n"`
	EndS      num    `json:"end_s"`
}

func stepOfInfo(s hil.StepInfo) stepMsg {
	return stepMsg{Type: "step", Index: s.Index, DurationS: num(s.DurationS), LengthM: num(s.LengthM),
		SpeedMPS: num(s.SpeedMPS), PeakUtil: num(s.PeakUtil), MinNormal: num(s.MinNormal), EndS: num(s.EndS)}
}

// alarmMsg is one alarm or event of the log.
type alarmMsg struct {
	Type     string `json:"type"` // "alarm"
	Tick     int64  `json:"tick"`
	T        num    `json:"t_s"`
	Kind     string `json:"kind"`
	Severity string `json:"severity"`
	Message  string `json:"message"`
	Foot     string `json:"foot,omitempty"`
}

// stateMsg is the run's state: greeting, running, tripped or done.
type stateMsg struct {
	Type    string `json:"type"` // "state"
	State   string `json:"state"`
	Outcome string `json:"outcome,omitempty"`
	Reason  string `json:"reason,omitempty"`
	// Firmware is the firmware's greeting line when known.
	Firmware string `json:"firmware,omitempty"`
	// Summary is the run's summary once it is done.
	Summary *summaryMsg `json:"summary,omitempty"`
}

// summaryMsg is the part of the summary the page shows at the end.
type summaryMsg struct {
	Steps    int    `json:"steps"`
	Ticks    int64  `json:"ticks"`
	SimTimeS num    `json:"sim_time_s"`
	PeakUtil num    `json:"peak_friction_utilization"`
	MinNorm  num    `json:"min_normal_force_n"`
	Speed    num    `json:"mean_speed_mps"`
	RunDir   string `json:"run_folder,omitempty"`
}

// noteMsg is a plain sentence about the run (handshake, link).
type noteMsg struct {
	Type string `json:"type"` // "note"
	Text string `json:"text"`
}

// playMsg is the playback position of a replay.
type playMsg struct {
	Type   string  `json:"type"` // "play"
	T      num     `json:"t"`
	End    num     `json:"end"`
	Speed  float64 `json:"speed"`
	Paused bool    `json:"paused"`
}

// encode makes one SSE message of v. The data line is one line of JSON
// (encoding/json escapes newlines in strings), so no splitting is needed.
func encode(v any) []byte {
	b, err := json.Marshal(v)
	if err != nil {
		// Every message type is made of numbers that encode and strings;
		// an error here is a bug, shown to the viewer rather than hidden.
		b, _ = json.Marshal(noteMsg{Type: "note", Text: "view: a message could not be encoded: " + err.Error()})
	}
	out := make([]byte, 0, len(b)+8)
	out = append(out, "data: "...)
	out = append(out, b...)
	return append(out, '\n', '\n')
}
