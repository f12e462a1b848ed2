package protocol

import (
	"bytes"
	"encoding/json"
	"fmt"
	"gaitrig/internal/nonfinite"
	"strconv"
	"unicode/utf8"
)

// The JSON debug form (docs/protocol.md section 10) is for people: logs,
// debugging tools, an MQTT debug mode. Arrays hold only the valid joint
// slots; float32 values are written in their shortest round-trip form, and
// NaN or infinities — which a faulty firmware may well send — as the strings
// "NaN", "+Inf", "-Inf" because JSON has no such numbers.

// AppendJSON appends the JSON form of m to dst. With enough capacity in dst
// it does not allocate. Unknown types give an *Error.
func AppendJSON(dst []byte, m *Message) ([]byte, error) {
	name := m.Type.Name()
	if name == "" {
		return dst, &Error{Kind: KindUnknownType, Got: int64(m.Type)}
	}
	dst = append(dst, `{"type":"`...)
	dst = append(dst, name...)
	dst = append(dst, `","seq":`...)
	dst = strconv.AppendUint(dst, uint64(m.Seq), 10)
	// Every message shows the version it travels in; a greeting's own
	// version field says the same (Decode refuses one that does not), so
	// it has no key of its own.
	dst = appendUintField(dst, "version", uint64(m.WireVersion()))
	switch m.Type {
	case TypeGreeting:
		g := &m.Greeting
		dst = appendUintField(dst, "actuators", uint64(g.Actuators))
		dst = append(dst, `,"name":`...)
		dst = appendJSONString(dst, g.Name)
		dst = append(dst, `,"build":`...)
		dst = appendJSONString(dst, g.Build)
	case TypeConfig:
		c := &m.Config
		n := clampJoints(c.Joints)
		dst = appendUintField(dst, "tick_hz", uint64(c.TickHz))
		dst = append(dst, `,"lockstep":`...)
		dst = strconv.AppendBool(dst, c.Lockstep)
		dst = appendUintField(dst, "joints", uint64(c.Joints))
		dst = append(dst, `,"joint_names":[`...)
		for i := range n {
			if i > 0 {
				dst = append(dst, ',')
			}
			dst = appendJSONString(dst, c.JointNames[i])
		}
		dst = append(dst, ']')
		dst = appendFloats(dst, "torque_limit", c.TorqueLimit[:n])
		if m.WireVersion() >= 2 {
			dst = appendUintField(dst, "watchdog_us", uint64(c.WatchdogUS))
		}
	case TypeState:
		s := &m.State
		n := clampJoints(s.Joints)
		dst = appendUintField(dst, "time_us", s.TimeUS)
		dst = appendUintField(dst, "joints", uint64(s.Joints))
		dst = appendUintField(dst, "contacts", uint64(s.Contacts))
		if s.BeltMM != 0 || s.Contacts&ContactBelt != 0 {
			// Only a state on a belt says where it is, so the JSON of
			// every other state reads as before.
			dst = append(dst, `,"belt_mm":`...)
			dst = strconv.AppendInt(dst, int64(s.BeltMM), 10)
		}
		dst = appendFloats(dst, "angle", s.Angle[:n])
		dst = appendFloats(dst, "rate", s.Rate[:n])
		dst = append(dst, `,"imu_pitch":`...)
		dst = appendF32(dst, s.IMUPitch)
		dst = append(dst, `,"imu_rate":`...)
		dst = appendF32(dst, s.IMURate)
	case TypeCommand:
		c := &m.Command
		dst = appendUintField(dst, "joints", uint64(c.Joints))
		dst = appendUintField(dst, "status", uint64(c.Status))
		if c.KneeUnlock != 0 {
			// Only a command that unlocks a knee says so, so the JSON of
			// every other command reads as before.
			dst = appendUintField(dst, "knee_unlock", uint64(c.KneeUnlock))
		}
		dst = appendFloats(dst, "torque", c.Torque[:clampJoints(c.Joints)])
	case TypeStop:
		dst = appendUintField(dst, "reason", uint64(m.Stop.Reason))
		dst = append(dst, `,"reason_name":`...)
		dst = appendJSONString(dst, StopReasonName(m.Stop.Reason))
		dst = append(dst, `,"text":`...)
		dst = appendJSONString(dst, m.Stop.Text)
	}
	return append(dst, '}'), nil
}

func clampJoints(n uint8) int { return int(min(n, MaxJoints)) }

func appendUintField(dst []byte, key string, v uint64) []byte {
	dst = append(dst, ',', '"')
	dst = append(dst, key...)
	dst = append(dst, '"', ':')
	return strconv.AppendUint(dst, v, 10)
}

func appendFloats(dst []byte, key string, v []float32) []byte {
	dst = append(dst, ',', '"')
	dst = append(dst, key...)
	dst = append(dst, `":[`...)
	for i, f := range v {
		if i > 0 {
			dst = append(dst, ',')
		}
		dst = appendF32(dst, f)
	}
	return append(dst, ']')
}

func appendF32(dst []byte, f float32) []byte {
	return nonfinite.AppendJSON(dst, float64(f), 32)
}

// appendJSONString writes s as a JSON string; invalid UTF-8 becomes U+FFFD.
func appendJSONString(dst []byte, s string) []byte {
	const hexDigits = "0123456789abcdef"
	dst = append(dst, '"')
	for i := 0; i < len(s); {
		c := s[i]
		if c < utf8.RuneSelf {
			switch {
			case c == '"' || c == '\\':
				dst = append(dst, '\\', c)
			case c < 0x20:
				dst = append(dst, '\\', 'u', '0', '0', hexDigits[c>>4], hexDigits[c&0xF])
			default:
				dst = append(dst, c)
			}
			i++
			continue
		}
		r, size := utf8.DecodeRuneInString(s[i:])
		if r == utf8.RuneError && size == 1 {
			dst = append(dst, `\ufffd`...)
		} else {
			dst = append(dst, s[i:i+size]...)
		}
		i += size
	}
	return append(dst, '"')
}

// jsonF32 reads a float32 written by AppendJSON: a number or one of the
// strings "NaN", "+Inf", "-Inf".
type jsonF32 float32

func (f *jsonF32) UnmarshalJSON(b []byte) error {
	v, err := nonfinite.ParseJSON(b, 32)
	if err != nil {
		return fmt.Errorf("not a float32: %s", b)
	}
	*f = jsonF32(v)
	return nil
}

type jsonMessage struct {
	Type        string    `json:"type"`
	Seq         uint32    `json:"seq"`
	Version     uint8     `json:"version"`
	Actuators   uint8     `json:"actuators"`
	Name        string    `json:"name"`
	Build       string    `json:"build"`
	TickHz      uint16    `json:"tick_hz"`
	Lockstep    bool      `json:"lockstep"`
	Joints      uint8     `json:"joints"`
	JointNames  []string  `json:"joint_names"`
	TorqueLimit []jsonF32 `json:"torque_limit"`
	WatchdogUS  *uint32   `json:"watchdog_us"`
	TimeUS      uint64    `json:"time_us"`
	Contacts    uint8     `json:"contacts"`
	BeltMM      int16     `json:"belt_mm"`
	Angle       []jsonF32 `json:"angle"`
	Rate        []jsonF32 `json:"rate"`
	IMUPitch    jsonF32   `json:"imu_pitch"`
	IMURate     jsonF32   `json:"imu_rate"`
	Status      uint16    `json:"status"`
	KneeUnlock  uint8     `json:"knee_unlock"`
	Torque      []jsonF32 `json:"torque"`
	Reason      uint8     `json:"reason"`
	ReasonName  string    `json:"reason_name"`
	Text        string    `json:"text"`
}

// ParseJSON reads the JSON form of one message into m (for debugging tools
// and tests; it allocates). Unknown keys are refused, arrays must hold exactly
// "joints" entries, and the message must pass the checks Encode makes. A
// missing "version" leaves m.Version at 0 (sent as Version).
func ParseJSON(data []byte, m *Message) error {
	var j jsonMessage
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&j); err != nil {
		return fmt.Errorf("protocol: JSON message: %w", err)
	}
	var t Type
	for _, c := range [...]Type{TypeGreeting, TypeConfig, TypeState, TypeCommand, TypeHeartbeat, TypeStop} {
		if c.Name() == j.Type {
			t = c
		}
	}
	if t == 0 {
		return fmt.Errorf("protocol: JSON message: unknown type %q", j.Type)
	}
	out := Message{Version: j.Version, Type: t, Seq: j.Seq}
	n := int(j.Joints)
	arr := func(key string, src []jsonF32, dst []float32) error {
		if len(src) != n {
			return fmt.Errorf("protocol: JSON %s: %q has %d entries, joints is %d", j.Type, key, len(src), n)
		}
		if n > len(dst) {
			return fmt.Errorf("protocol: JSON %s: joints %d is beyond %d", j.Type, n, MaxJoints)
		}
		for i, v := range src {
			dst[i] = float32(v)
		}
		return nil
	}
	var err error
	switch t {
	case TypeGreeting:
		out.Greeting = Greeting{Version: j.Version, Actuators: j.Actuators, Name: j.Name, Build: j.Build}
	case TypeConfig:
		out.Config = Config{TickHz: j.TickHz, Lockstep: j.Lockstep, Joints: j.Joints}
		// The watchdog is a field of version 2: a version-1 config with
		// one, or a version-2 config without, is refused by name.
		switch v := out.WireVersion(); {
		case v == 1 && j.WatchdogUS != nil:
			return fmt.Errorf("protocol: JSON config: \"watchdog_us\" is not a field of a version-1 config")
		case v >= 2 && j.WatchdogUS == nil:
			return fmt.Errorf("protocol: JSON config: version %d needs \"watchdog_us\"", v)
		case j.WatchdogUS != nil:
			out.Config.WatchdogUS = *j.WatchdogUS
		}
		if len(j.JointNames) != n || n > MaxJoints {
			return fmt.Errorf("protocol: JSON config: \"joint_names\" has %d entries, joints is %d (at most %d)", len(j.JointNames), n, MaxJoints)
		}
		copy(out.Config.JointNames[:], j.JointNames)
		err = arr("torque_limit", j.TorqueLimit, out.Config.TorqueLimit[:])
	case TypeState:
		out.State = State{TimeUS: j.TimeUS, Joints: j.Joints, Contacts: j.Contacts, BeltMM: j.BeltMM,
			IMUPitch: float32(j.IMUPitch), IMURate: float32(j.IMURate)}
		if err = arr("angle", j.Angle, out.State.Angle[:]); err == nil {
			err = arr("rate", j.Rate, out.State.Rate[:])
		}
	case TypeCommand:
		out.Command = Command{Joints: j.Joints, Status: j.Status, KneeUnlock: j.KneeUnlock}
		err = arr("torque", j.Torque, out.Command.Torque[:])
	case TypeStop:
		out.Stop = Stop{Reason: j.Reason, Text: j.Text}
	}
	if err != nil {
		return err
	}
	var scratch [MaxFrameLen]byte
	if _, err := Encode(scratch[:], &out); err != nil {
		return fmt.Errorf("protocol: JSON message: %w", err)
	}
	*m = out
	return nil
}
