package protocol

import (
	"bytes"
	"encoding/binary"
	"math"
	"strconv"
)

// Frame geometry (docs/protocol.md section 2).
const (
	// HeaderLen is the size of version, type, seq and length.
	HeaderLen = 8
	// CRCLen is the size of the trailing CRC.
	CRCLen = 2
	// MinFrameLen is the smallest frame: header and CRC, no payload.
	MinFrameLen = HeaderLen + CRCLen
	// MaxFrameLen is the largest frame any protocol version may send. It is
	// larger than any frame of versions 1 and 2 so that a frame of a newer version can
	// still be read far enough to refuse it with a version error.
	MaxFrameLen = 512
	// MaxWireLen is the largest COBS encoding of a frame, delimiter excluded.
	MaxWireLen = MaxFrameLen + MaxFrameLen/254 + 1
)

// Payload lengths of the messages (docs/protocol.md section 3). Only the
// config differs between versions: version 2 appends watchdog_us.
const (
	GreetingLen  = 2 + 2*MaxNameLen                       // 66
	ConfigLenV1  = 4 + MaxJoints*MaxNameLen + 4*MaxJoints // 292
	ConfigLenV2  = ConfigLenV1 + 4                        // 296
	StateLen     = 12 + 8*MaxJoints + 8                   // 84
	CommandLen   = 4 + 4*MaxJoints                        // 36
	HeartbeatLen = 0
	StopLen      = 1 + MaxNameLen // 33
)

// KnownVersion reports whether v is a protocol version this build speaks
// (MinVersion … Version).
func KnownVersion(v uint8) bool { return v >= MinVersion && v <= Version }

// PayloadLen returns the fixed payload length of message type t in protocol
// version v, and false if v is not a version this build speaks or t is not
// a message type of it.
func PayloadLen(v uint8, t Type) (int, bool) {
	if !KnownVersion(v) {
		return 0, false
	}
	switch t {
	case TypeGreeting:
		return GreetingLen, true
	case TypeConfig:
		if v == 1 {
			return ConfigLenV1, true
		}
		return ConfigLenV2, true
	case TypeState:
		return StateLen, true
	case TypeCommand:
		return CommandLen, true
	case TypeHeartbeat:
		return HeartbeatLen, true
	case TypeStop:
		return StopLen, true
	}
	return 0, false
}

// FrameLen returns the whole frame length (header, payload, CRC) of type t
// in protocol version v, or 0 if either is unknown.
func FrameLen(v uint8, t Type) int {
	n, ok := PayloadLen(v, t)
	if !ok {
		return 0
	}
	return HeaderLen + n + CRCLen
}

// Name returns the lower-case name of the type as used in the specification
// and the JSON form ("state", "command", …), or "" for an unknown type.
func (t Type) Name() string {
	switch t {
	case TypeGreeting:
		return "greeting"
	case TypeConfig:
		return "config"
	case TypeState:
		return "state"
	case TypeCommand:
		return "command"
	case TypeHeartbeat:
		return "heartbeat"
	case TypeStop:
		return "stop"
	}
	return ""
}

// String returns the name of the type, or its hex value if unknown.
func (t Type) String() string {
	if n := t.Name(); n != "" {
		return n
	}
	const hexDigits = "0123456789ABCDEF"
	return string([]byte{'0', 'x', hexDigits[t>>4], hexDigits[t&0xF]})
}

// StopReasonName returns the specification's name of a stop reason code
// ("end", "watchdog", …), or "" for a code this version does not know.
func StopReasonName(code uint8) string {
	switch code {
	case StopEnd:
		return "end"
	case StopEStop:
		return "estop"
	case StopWatchdog:
		return "watchdog"
	case StopAborted:
		return "aborted"
	case StopFirmware:
		return "firmware"
	case StopBadVersion:
		return "bad_version"
	case StopMismatch:
		return "mismatch"
	}
	return ""
}

var le = binary.LittleEndian

// Encode writes m as one frame (header, payload, CRC; no COBS) into dst and
// returns the frame length. dst needs FrameLen(v, m.Type) bytes; MaxFrameLen
// always suffices. The header version v is m.WireVersion(); a version this
// build does not speak is an *Error of KindVersion. A Greeting with Version
// 0 is sent with the header's version. Encode checks
// what the decoder would refuse (joint counts, string lengths, tick rate,
// watchdog) and returns an *Error instead of writing a frame the peer cannot
// accept. It never allocates.
func Encode(dst []byte, m *Message) (int, error) {
	v := m.WireVersion()
	if !KnownVersion(v) {
		return 0, &Error{Kind: KindVersion, Type: m.Type, Got: int64(v), Want: int64(Version), WantMin: int64(MinVersion), Detail: "the message to send"}
	}
	plen, ok := PayloadLen(v, m.Type)
	if !ok {
		return 0, &Error{Kind: KindUnknownType, Got: int64(m.Type)}
	}
	n := HeaderLen + plen + CRCLen
	if len(dst) < n {
		return 0, ErrShortBuffer
	}
	dst = dst[:n]
	dst[0] = v
	dst[1] = byte(m.Type)
	le.PutUint32(dst[2:], m.Seq)
	le.PutUint16(dst[6:], uint16(plen))
	p := dst[HeaderLen : HeaderLen+plen]
	var err error
	switch m.Type {
	case TypeGreeting:
		err = encodeGreeting(p, &m.Greeting, v)
	case TypeConfig:
		err = encodeConfig(p, &m.Config, v)
	case TypeState:
		err = encodeState(p, &m.State)
	case TypeCommand:
		err = encodeCommand(p, &m.Command)
	case TypeHeartbeat:
	case TypeStop:
		err = putString(p[1:1+MaxNameLen], m.Stop.Text, TypeStop, "text")
		p[0] = m.Stop.Reason
	}
	if err != nil {
		return 0, err
	}
	le.PutUint16(dst[HeaderLen+plen:], CRC16(dst[:HeaderLen+plen]))
	return n, nil
}

func checkJoints(t Type, field string, n uint8) error {
	if n == 0 || n > MaxJoints {
		return &Error{Kind: KindTooManyJoints, Type: t, Field: field, Got: int64(n), Want: MaxJoints}
	}
	return nil
}

func encodeGreeting(p []byte, g *Greeting, v uint8) error {
	if err := checkJoints(TypeGreeting, "actuators", g.Actuators); err != nil {
		return err
	}
	p[0] = g.Version
	if p[0] == 0 {
		p[0] = v
	}
	p[1] = g.Actuators
	if err := putString(p[2:2+MaxNameLen], g.Name, TypeGreeting, "name"); err != nil {
		return err
	}
	return putString(p[2+MaxNameLen:2+2*MaxNameLen], g.Build, TypeGreeting, "build")
}

func encodeConfig(p []byte, c *Config, v uint8) error {
	if err := checkJoints(TypeConfig, "joints", c.Joints); err != nil {
		return err
	}
	if c.TickHz == 0 {
		return &Error{Kind: KindBadField, Type: TypeConfig, Field: "tick_hz", Got: 0, Detail: "the tick rate must be at least 1 Hz"}
	}
	if v >= 2 {
		if c.WatchdogUS == 0 {
			return errNoWatchdog
		}
		le.PutUint32(p[ConfigLenV1:], c.WatchdogUS)
	}
	le.PutUint16(p[0:], c.TickHz)
	p[2] = 0
	if c.Lockstep {
		p[2] = 1
	}
	p[3] = c.Joints
	names := p[4 : 4+MaxJoints*MaxNameLen]
	limits := p[4+MaxJoints*MaxNameLen : ConfigLenV1]
	for i := range MaxJoints {
		name, limit := "", float32(0)
		if i < int(c.Joints) {
			name, limit = c.JointNames[i], c.TorqueLimit[i]
		}
		if err := putString(names[i*MaxNameLen:(i+1)*MaxNameLen], name, TypeConfig, jointNameField[i]); err != nil {
			return err
		}
		putF32(limits[4*i:], limit)
	}
	return nil
}

// errNoWatchdog refuses a version-2 config without a watchdog: the rig
// always enforces one, and a firmware must be able to rely on the field.
var errNoWatchdog = &Error{Kind: KindBadField, Type: TypeConfig, Field: "watchdog_us", Got: 0, Detail: "the watchdog must be at least 1 µs"}

var jointNameField = [MaxJoints]string{
	"joint_names[0]", "joint_names[1]", "joint_names[2]", "joint_names[3]",
	"joint_names[4]", "joint_names[5]", "joint_names[6]", "joint_names[7]",
}

func encodeState(p []byte, s *State) error {
	if err := checkJoints(TypeState, "joints", s.Joints); err != nil {
		return err
	}
	le.PutUint64(p[0:], s.TimeUS)
	p[8] = s.Joints
	p[9] = s.Contacts
	le.PutUint16(p[10:], uint16(s.BeltMM))
	for i := range MaxJoints {
		a, r := float32(0), float32(0)
		if i < int(s.Joints) {
			a, r = s.Angle[i], s.Rate[i]
		}
		putF32(p[12+4*i:], a)
		putF32(p[44+4*i:], r)
	}
	putF32(p[76:], s.IMUPitch)
	putF32(p[80:], s.IMURate)
	return nil
}

func encodeCommand(p []byte, c *Command) error {
	if err := checkJoints(TypeCommand, "joints", c.Joints); err != nil {
		return err
	}
	p[0] = c.Joints
	p[1] = c.KneeUnlock
	le.PutUint16(p[2:], c.Status)
	for i := range MaxJoints {
		t := float32(0)
		if i < int(c.Joints) {
			t = c.Torque[i]
		}
		putF32(p[4+4*i:], t)
	}
	return nil
}

func putF32(b []byte, f float32) { le.PutUint32(b, math.Float32bits(f)) }
func getF32(b []byte) float32    { return math.Float32frombits(le.Uint32(b)) }

// putString writes s zero-padded into the fixed field b.
func putString(b []byte, s string, t Type, field string) error {
	if len(s) > len(b) {
		return &Error{Kind: KindStringTooLong, Type: t, Field: field, Got: int64(len(s)), Want: int64(len(b))}
	}
	if i := indexZero(s); i >= 0 {
		return &Error{Kind: KindStringTooLong, Type: t, Field: field, Got: int64(i), Detail: "holds a zero byte, which ends a fixed text field"}
	}
	n := copy(b, s)
	clear(b[n:])
	return nil
}

func indexZero(s string) int {
	for i := 0; i < len(s); i++ {
		if s[i] == 0 {
			return i
		}
	}
	return -1
}

// getString sets *dst to the text in the fixed field b. It allocates only if
// the text differs from *dst, so repeated greetings and configs are free.
func getString(dst *string, b []byte) {
	if i := bytes.IndexByte(b, 0); i >= 0 {
		b = b[:i]
	}
	if *dst != string(b) {
		*dst = string(b)
	}
}

// Decode checks one frame (header, payload, CRC; COBS already removed) and
// fills m. The checks follow docs/protocol.md section 5 and each failure is
// an *Error naming the values involved. On success only m.Version, m.Type,
// m.Seq and the field matching m.Type are written; unused joint slots are
// set to zero. Frames of every version from MinVersion to Version decode;
// holding a session to the one version its greeting agreed is the caller's
// part. When the only problem is the protocol version (KindVersion),
// m.Version, m.Type and m.Seq are still set, so the caller can answer a
// greeting with a stop.
// Decode never allocates for state, command, heartbeat and stop frames whose
// text is unchanged; greeting and config allocate only for texts that differ
// from those already in m. It never panics, whatever frame holds.
func Decode(frame []byte, m *Message) error {
	if len(frame) < MinFrameLen {
		return &Error{Kind: KindTruncated, Got: int64(len(frame)), Want: MinFrameLen}
	}
	if len(frame) > MaxFrameLen {
		return &Error{Kind: KindTooLong, Got: int64(len(frame)), Want: MaxFrameLen}
	}
	t := Type(frame[1])
	plen := int(le.Uint16(frame[6:]))
	if have := len(frame) - MinFrameLen; plen > have {
		return &Error{Kind: KindTruncated, Type: t, Got: int64(plen), Want: int64(have),
			Detail: "the header says " + strconv.Itoa(plen) + " payload bytes, " + strconv.Itoa(have) + " arrived"}
	} else if plen < have {
		return &Error{Kind: KindLength, Type: t, Got: int64(plen), Want: int64(have),
			Detail: strconv.Itoa(have-plen) + " bytes more than the header's payload length " + strconv.Itoa(plen)}
	}
	body := frame[:HeaderLen+plen]
	got := le.Uint16(frame[HeaderLen+plen:])
	if want := CRC16(body); got != want {
		return &Error{Kind: KindBadCRC, Type: t, Got: int64(got), Want: int64(want)}
	}
	v := frame[0]
	if !KnownVersion(v) {
		m.Version, m.Type, m.Seq = v, t, le.Uint32(frame[2:])
		return &Error{Kind: KindVersion, Type: t, Got: int64(v), Want: int64(Version), WantMin: int64(MinVersion)}
	}
	want, ok := PayloadLen(v, t)
	if !ok {
		return &Error{Kind: KindUnknownType, Type: t, Got: int64(t)}
	}
	if plen != want {
		return &Error{Kind: KindLength, Type: t, Got: int64(plen), Want: int64(want)}
	}
	p := frame[HeaderLen : HeaderLen+plen]
	var err error
	switch t {
	case TypeGreeting:
		err = decodeGreeting(p, &m.Greeting, v)
	case TypeConfig:
		err = decodeConfig(p, &m.Config, v)
	case TypeState:
		err = decodeState(p, &m.State)
	case TypeCommand:
		err = decodeCommand(p, &m.Command)
	case TypeHeartbeat:
	case TypeStop:
		m.Stop.Reason = p[0]
		getString(&m.Stop.Text, p[1:])
	}
	if err != nil {
		if e, ok := err.(*Error); ok && e.Kind == KindVersion {
			// the greeting's own version field: as for the header's version
			m.Version, m.Type, m.Seq = v, t, le.Uint32(frame[2:])
		}
		return err
	}
	m.Version = v
	m.Type = t
	m.Seq = le.Uint32(frame[2:])
	return nil
}

// decodeGreeting reads a greeting of a frame of version v. Its payload
// version must equal v: a greeting that says two things is refused as a
// version error naming the header's version as the one expected.
func decodeGreeting(p []byte, g *Greeting, v uint8) error {
	if p[0] != v {
		return &Error{Kind: KindVersion, Type: TypeGreeting, Got: int64(p[0]), Want: int64(v), Detail: "the greeting"}
	}
	if err := checkJoints(TypeGreeting, "actuators", p[1]); err != nil {
		return err
	}
	g.Version = p[0]
	g.Actuators = p[1]
	getString(&g.Name, p[2:2+MaxNameLen])
	getString(&g.Build, p[2+MaxNameLen:2+2*MaxNameLen])
	return nil
}

func decodeConfig(p []byte, c *Config, v uint8) error {
	hz := le.Uint16(p[0:])
	if hz == 0 {
		return &Error{Kind: KindBadField, Type: TypeConfig, Field: "tick_hz", Got: 0, Detail: "the tick rate must be at least 1 Hz"}
	}
	if p[2] > 1 {
		return &Error{Kind: KindBadField, Type: TypeConfig, Field: "lockstep", Got: int64(p[2]), Detail: "must be 0 (wall-clock) or 1 (lockstep)"}
	}
	if err := checkJoints(TypeConfig, "joints", p[3]); err != nil {
		return err
	}
	var wd uint32
	if v >= 2 {
		if wd = le.Uint32(p[ConfigLenV1:]); wd == 0 {
			return errNoWatchdog
		}
	}
	c.WatchdogUS = wd
	c.TickHz = hz
	c.Lockstep = p[2] == 1
	c.Joints = p[3]
	names := p[4 : 4+MaxJoints*MaxNameLen]
	limits := p[4+MaxJoints*MaxNameLen : ConfigLenV1]
	for i := range MaxJoints {
		if i < int(c.Joints) {
			getString(&c.JointNames[i], names[i*MaxNameLen:(i+1)*MaxNameLen])
			c.TorqueLimit[i] = getF32(limits[4*i:])
		} else {
			c.JointNames[i], c.TorqueLimit[i] = "", 0
		}
	}
	return nil
}

func decodeState(p []byte, s *State) error {
	if err := checkJoints(TypeState, "joints", p[8]); err != nil {
		return err
	}
	s.TimeUS = le.Uint64(p[0:])
	s.Joints = p[8]
	s.Contacts = p[9]
	s.BeltMM = int16(le.Uint16(p[10:]))
	for i := range MaxJoints {
		if i < int(s.Joints) {
			s.Angle[i] = getF32(p[12+4*i:])
			s.Rate[i] = getF32(p[44+4*i:])
		} else {
			s.Angle[i], s.Rate[i] = 0, 0
		}
	}
	s.IMUPitch = getF32(p[76:])
	s.IMURate = getF32(p[80:])
	return nil
}

func decodeCommand(p []byte, c *Command) error {
	if err := checkJoints(TypeCommand, "joints", p[0]); err != nil {
		return err
	}
	c.Joints = p[0]
	c.KneeUnlock = p[1]
	c.Status = le.Uint16(p[2:])
	for i := range MaxJoints {
		if i < int(c.Joints) {
			c.Torque[i] = getF32(p[4+4*i:])
		} else {
			c.Torque[i] = 0
		}
	}
	return nil
}
