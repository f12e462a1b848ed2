package conformance

import (
	"context"
	"errors"
	"fmt"
	"math"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/hil"
)

// session is the battery's end of one link: the messages it sends and what
// came back, counted.
type session struct {
	conn   bridges.Conn
	n      int              // joints configured
	config protocol.Message // the config sent
	// version is the protocol version the firmware greeted with: every
	// frame the battery sends carries it (docs/protocol.md section 8).
	version uint8
	state   protocol.Message // the latest state sent
	seq     uint32           // seq of the latest state
	in      protocol.Message
	fe      *bridges.FrameError

	// Counts of what the firmware sent.
	commands, greetings, heartbeats, wrongWay, frameErrors int
	statusOr                                               uint16
	unlockOr                                               uint8 // knee_unlock bits seen in any command
	unlockCount, unlockUndef                               int   // commands with knee_unlock bits, with undefined ones
	undefCount, faultCount, safeCount                      int
	lastFrameErr                                           string
	lastCmd                                                protocol.Command // the latest command that answered the awaited seq

	// extraFor counts commands for one seq other than the awaited one
	// (a resent or a damaged state) into extra, rather than as stray.
	extraFor uint32
	extra    int
	gone     bool // the link closed
}

func newSession(conn bridges.Conn) *session {
	return &session{conn: conn, extraFor: math.MaxUint32, version: protocol.Version}
}

// configure prepares the config for n joints (sent with sendConfig).
func (s *session) configure(n int) {
	s.n = n
	c := protocol.Config{TickHz: configTickHz, Lockstep: true, Joints: uint8(n)}
	if s.version >= 2 {
		// The watchdog the battery judges answers by (Watchdog).
		c.WatchdogUS = hil.WatchdogMicros(Watchdog)
	}
	for i, name := range jointNames(n) {
		c.JointNames[i] = name
		c.TorqueLimit[i] = configLimit
	}
	s.config = protocol.Message{Version: s.version, Type: protocol.TypeConfig, Config: c}
}

func (s *session) sendConfig(m *protocol.Message) error { return s.conn.Send(m) }

// nextState makes the state with the next seq, readings frozen.
func (s *session) nextState() *protocol.Message {
	s.seq++
	st := protocol.State{TimeUS: uint64(s.seq-1) * 1_000_000 / configTickHz, Joints: uint8(s.n), Contacts: frozenContacts}
	for i := 0; i < s.n; i++ {
		st.Angle[i] = frozenAngle
		if i%2 == 1 {
			st.Angle[i] = -frozenAngle
		}
	}
	s.state = protocol.Message{Version: s.version, Type: protocol.TypeState, Seq: s.seq, State: st}
	return &s.state
}

// answer is what came back for one state.
type answer struct {
	seq    uint32         // the state's seq
	cmd    bool           // a command with that seq arrived
	joints uint8          // its joint count
	rtt    time.Duration  // send to receive
	stop   *protocol.Stop // a stop came instead
	stray  int            // commands with other seqs seen meanwhile
	first  uint32         // the first of them
	gone   bool           // the link closed
	why    string         // what happened instead of a command
}

// problem says what is wrong with the answer, "" when nothing.
func (a answer) problem(s *session) string {
	switch {
	case a.stop != nil:
		return fmt.Sprintf("the firmware sent stop reason %d (%s) %q instead of a command", a.stop.Reason, protocol.StopReasonName(a.stop.Reason), a.stop.Text)
	case !a.cmd:
		return a.why
	case int(a.joints) != s.n:
		return fmt.Sprintf("the command carries %d torques, the config has %d joints", a.joints, s.n)
	case a.stray > 0:
		return fmt.Sprintf("also %d commands with other seqs (first seq %d) before it", a.stray, a.first)
	}
	return ""
}

// exchange sends st and waits up to the watchdog for its command.
func (s *session) exchange(ctx context.Context, st *protocol.Message) answer {
	t0 := time.Now()
	if err := s.conn.Send(st); err != nil {
		a := answer{seq: st.Seq, why: fmt.Sprintf("sending the state: %v", err)}
		if errors.Is(err, bridges.ErrClosed) {
			a.gone, s.gone = true, true
		}
		return a
	}
	a := s.await(ctx, st.Seq, Watchdog)
	a.rtt = time.Since(t0)
	return a
}

// await takes messages for up to d until the command with seq arrives, a
// stop arrives or the link closes. Greetings, heartbeats and refused frames
// are counted on the way.
func (s *session) await(ctx context.Context, seq uint32, d time.Duration) answer {
	a := answer{seq: seq}
	deadline := time.Now().Add(d)
	for {
		if err := ctx.Err(); err != nil {
			a.why = "interrupted"
			return a
		}
		err := s.conn.Recv(deadline, &s.in)
		switch {
		case err == nil:
		case errors.As(err, &s.fe):
			s.frameErrors++
			s.lastFrameErr = s.fe.Reason
			continue
		case errors.Is(err, bridges.ErrTimeout):
			a.why = fmt.Sprintf("no command with seq %d within %v", seq, d)
			if a.stray > 0 {
				a.why += fmt.Sprintf(" (%d with other seqs, first %d)", a.stray, a.first)
			}
			return a
		case errors.Is(err, bridges.ErrDisconnected):
			continue // the link may come back; the deadline decides
		default:
			a.gone, s.gone = true, true
			a.why = fmt.Sprintf("the link closed before a command with seq %d came: %v", seq, err)
			return a
		}
		m := &s.in
		switch m.Type {
		case protocol.TypeCommand:
			s.commands++
			st := m.Command.Status
			s.statusOr |= st
			if u := m.Command.KneeUnlock; u != 0 {
				s.unlockOr |= u
				s.unlockCount++
				if u&^DefinedKneeUnlockBits != 0 {
					s.unlockUndef++
				}
			}
			if st&^DefinedStatusBits != 0 {
				s.undefCount++
			}
			if st&protocol.StatusFault != 0 {
				s.faultCount++
			}
			if st&protocol.StatusSafeMode != 0 {
				s.safeCount++
			}
			switch m.Seq {
			case seq:
				a.cmd, a.joints = true, m.Command.Joints
				s.lastCmd = m.Command
				return a
			case s.extraFor:
				s.extra++
			default:
				if a.stray == 0 {
					a.first = m.Seq
				}
				a.stray++
			}
		case protocol.TypeGreeting:
			s.greetings++
		case protocol.TypeHeartbeat:
			s.heartbeats++
		case protocol.TypeStop:
			st := m.Stop
			a.stop = &st
			return a
		default:
			s.wrongWay++
		}
	}
}

// awaitGreeting waits up to d for a greeting and returns it with its seq.
func (s *session) awaitGreeting(ctx context.Context, d time.Duration) (protocol.Greeting, uint32, error) {
	deadline := time.Now().Add(d)
	for {
		if err := ctx.Err(); err != nil {
			return protocol.Greeting{}, 0, err
		}
		err := s.conn.Recv(deadline, &s.in)
		switch {
		case err == nil:
			if s.in.Type == protocol.TypeGreeting {
				if protocol.KnownVersion(s.in.Greeting.Version) {
					s.version = s.in.Greeting.Version
				}
				return s.in.Greeting, s.in.Seq, nil
			}
			continue // anything else before a greeting: left over from before
		case errors.As(err, &s.fe):
			s.frameErrors++
			s.lastFrameErr = s.fe.Reason
			continue
		case errors.Is(err, bridges.ErrTimeout):
			msg := fmt.Sprintf("no greeting within %v", d)
			if s.frameErrors > 0 {
				msg += fmt.Sprintf("; %d frames refused, the last: %s", s.frameErrors, s.lastFrameErr)
			}
			return protocol.Greeting{}, 0, errors.New(msg)
		case errors.Is(err, bridges.ErrDisconnected):
			continue
		default:
			s.gone = true
			return protocol.Greeting{}, 0, fmt.Errorf("%w before a greeting: %v", errLinkGone, err)
		}
	}
}
