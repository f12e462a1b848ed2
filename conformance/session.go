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
	"gaitrig/internal/hostload"
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

	// wd is the watchdog answers are judged by (Watchdog; shorter in
	// tests), and host the CPU pressure of the host the battery runs on
	// (nil without PSI), by which awaitAnswer tells a starved firmware
	// from a silent one.
	wd   time.Duration
	host *hostload.Pressure
}

// newSession starts a session on conn that judges answers by the watchdog
// wd on the host whose CPU pressure host reads.
func newSession(conn bridges.Conn, wd time.Duration, host *hostload.Pressure) *session {
	return &session{conn: conn, extraFor: math.MaxUint32, version: protocol.Version, wd: wd, host: host}
}

// configure prepares the config for n joints (sent with sendConfig).
func (s *session) configure(n int) {
	s.n = n
	c := protocol.Config{TickHz: configTickHz, Lockstep: true, Joints: uint8(n)}
	if s.version >= 2 {
		// The watchdog the battery judges answers by (Watchdog).
		c.WatchdogUS = hil.WatchdogMicros(s.wd)
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
	// hostStalled: no command came, not even one for another seq, but the
	// host's CPUs were contended for all but less than a watchdog of the
	// wait, so the firmware may never have been run; the answer says
	// nothing about the firmware.
	hostStalled bool
	// charged is the part of the wait charged to the firmware's watchdog:
	// the wait less the battery's own stalls and the contended time.
	charged time.Duration
	// beats counts the heartbeats that came during the wait, lastBeat the
	// seq of the latest (the latest state the firmware received, docs/
	// protocol.md section 6 item 4): for the message only, since they
	// travel the same link as the state and prove nothing about it in time.
	beats    int
	lastBeat uint32
	why      string // what happened instead of a command
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

// exchange sends st and waits for its command (awaitAnswer).
func (s *session) exchange(ctx context.Context, st *protocol.Message) answer {
	// The pressure's first reading comes before the clock starts, so its
	// system call is not in the round trip.
	var busy hostload.WaitCredit
	busy.Start(s.host)
	t0 := time.Now()
	if err := s.conn.Send(st); err != nil {
		a := answer{seq: st.Seq, why: fmt.Sprintf("sending the state: %v", err)}
		if errors.Is(err, bridges.ErrClosed) {
			a.gone, s.gone = true, true
		}
		return a
	}
	a := s.awaitAnswer(ctx, st.Seq, t0, &busy)
	a.rtt = time.Since(t0)
	return a
}

// finalLooks bounds the messages awaitAnswer reads, past the watchdog,
// from what is already waiting before it gives its verdict, so a firmware
// that floods the link cannot hold it there. (The rig's lockstep loop has
// the same bound, for the same reason.)
const finalLooks = 64

// awaitAnswer waits for the command with seq to a state sent at sent,
// charging the firmware's watchdog (s.wd) only with time in which it could
// have answered, as the rig's lockstep loop does: not the battery's own
// stalls (waits that ended more than hostload.StallSlack late), and not
// the time the host's CPUs were contended (busy, started before the state
// went out). On a quiet host the watchdog holds exactly.
//
// Before any verdict it reads what is already waiting, without waiting for
// more: after a stall of the battery itself the answer may be in the
// buffer. While the host is contended and no command at all came from the
// firmware it waits on, up to hostload.Limit; if the host never left the
// firmware a watchdog's worth of CPU by then, the answer is marked
// hostStalled: not the firmware's failure. A firmware that sent commands
// for other seqs meanwhile was running, and is judged at once.
func (s *session) awaitAnswer(ctx context.Context, seq uint32, sent time.Time, busy *hostload.WaitCredit) answer {
	a := answer{seq: seq}
	var own time.Duration
	charged := func(now time.Time) time.Duration { return now.Sub(sent) - own - busy.Total() }
	done := func() answer {
		a.charged = charged(time.Now())
		return a
	}
	for {
		now := time.Now()
		left := s.wd - charged(now)
		if left <= 0 {
			if s.lookAtWaiting(ctx, &a) {
				return done()
			}
			busy.Credit(s.host)
			now = time.Now()
			silent := now.Sub(sent)
			if a.stray == 0 && charged(now) < s.wd && silent < hostload.Limit(s.wd) {
				// At least a millisecond per look: with the pressure
				// credited bit by bit the time left may stay tiny.
				left = max(s.wd-charged(now), time.Millisecond)
			} else {
				if a.stray == 0 && charged(now) < s.wd {
					busy.Settle(s.host)
				}
				if c := charged(now); a.stray == 0 && c < s.wd {
					a.hostStalled = true
					a.why = fmt.Sprintf("no command with seq %d for %v, %v of it with the host's CPUs contended: the host never left the firmware a watchdog (%v) to answer in; not the firmware's fault, run the battery again on a quieter host",
						seq, silent.Round(time.Millisecond), busy.Total().Round(time.Millisecond), s.wd)
					a.why += a.meanwhile()
					return done()
				}
				a.why = fmt.Sprintf("no command with seq %d within %v", seq, s.wd)
				if silent-s.wd > hostload.StallSlack {
					a.why += fmt.Sprintf(" (waited %v: %v of the battery's own stalls and %v of a contended host not charged)",
						silent.Round(time.Millisecond), own.Round(time.Millisecond), busy.Total().Round(time.Millisecond))
				}
				a.why += a.meanwhile()
				return done()
			}
		}
		deadline := now.Add(left)
		if s.await(ctx, &a, deadline) {
			return done()
		}
		if late := time.Since(deadline); late > hostload.StallSlack {
			own += late
		}
	}
}

// lookAtWaiting reads, into a, up to finalLooks messages that are already
// waiting, without waiting for more; true when one ends the wait (as
// await).
func (s *session) lookAtWaiting(ctx context.Context, a *answer) bool {
	return s.await(ctx, a, time.Now())
}

// awaitFor waits up to d, by the wall clock, for the command with seq (or a
// stop, or the link's end). It is for checks where the firmware must send
// nothing (a stopped firmware): a loaded host can only hide a command
// there, never make one up, so the time is not credited.
func (s *session) awaitFor(ctx context.Context, seq uint32, d time.Duration) answer {
	a := answer{seq: seq}
	if !s.await(ctx, &a, time.Now().Add(d)) {
		a.why = fmt.Sprintf("no command with seq %d within %v", seq, d)
		a.why += a.meanwhile()
	}
	return a
}

// meanwhile says, for a message, how many commands with other seqs and
// how many heartbeats came during the wait; "" for none.
func (a *answer) meanwhile() string {
	out := ""
	if a.stray > 0 {
		out += fmt.Sprintf(" (%d with other seqs, first %d)", a.stray, a.first)
	}
	if a.beats > 0 {
		out += fmt.Sprintf(" (%d heartbeats meanwhile, the latest with seq %d)", a.beats, a.lastBeat)
	}
	return out
}

// await takes messages until deadline, into a, until the command with
// a.seq arrives, a stop arrives, the link closes or ctx ends (true), or
// the deadline passes (false: the caller decides what that means).
// Greetings, heartbeats and refused frames are counted on the way, and
// commands with other seqs as a's strays. Past the deadline it reads at
// most finalLooks messages already waiting, so a firmware that floods the
// link cannot hold it.
func (s *session) await(ctx context.Context, a *answer, deadline time.Time) bool {
	looks := 0
	seq := a.seq
	for {
		if err := ctx.Err(); err != nil {
			a.why = "interrupted"
			return true
		}
		if !time.Now().Before(deadline) {
			if looks >= finalLooks {
				return false
			}
			looks++
		}
		err := s.conn.Recv(deadline, &s.in)
		switch {
		case err == nil:
		case errors.As(err, &s.fe):
			s.frameErrors++
			s.lastFrameErr = s.fe.Reason
			continue
		case errors.Is(err, bridges.ErrTimeout):
			return false
		case errors.Is(err, bridges.ErrDisconnected):
			continue // the link may come back; the deadline decides
		default:
			a.gone, s.gone = true, true
			a.why = fmt.Sprintf("the link closed before a command with seq %d came: %v", seq, err)
			return true
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
				return true
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
			a.beats++
			a.lastBeat = m.Seq
		case protocol.TypeStop:
			st := m.Stop
			a.stop = &st
			return true
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
