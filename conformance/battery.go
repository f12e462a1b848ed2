package conformance

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strings"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/hil"
	"gaitrig/internal/hostload"
	"gaitrig/record"
)

// Dialer opens a new link to the firmware and returns the rig's end and a
// function that closes it (and stops whatever the dial started). The
// battery dials once per session: closing the link and dialling again is
// how it restarts the rig.
type Dialer func() (conn bridges.Conn, closeLink func(), err error)

// FrameSender is implemented by links that can send an already encoded
// frame as it is (serial and MQTT); the battery sends damaged frames
// through it. A link without it (in-process channels, which carry decoded
// messages and no bytes) cannot carry a damaged frame, and the checks that
// need one are skipped as not applicable.
type FrameSender interface {
	SendFrame(frame []byte) error
}

// Status is a check's result.
type Status string

// Check results.
const (
	// Pass: the firmware did what the document asks.
	Pass Status = "pass"
	// Fail: it did not; Seen says what happened instead.
	Fail Status = "fail"
	// Skipped: the check does not apply to this link (Seen says why); it
	// does not count against the verdict.
	Skipped Status = "skipped"
	// NotRun: an earlier failure left nothing to check with (no greeting,
	// a link that closed); a required check that was not run withholds a
	// passing verdict.
	NotRun Status = "not_run"
	// HostStall: no answer came, but the host the battery runs on kept its
	// CPUs contended for all but less than a watchdog of a long wait
	// (internal/hostload), so the firmware may never have been run. The
	// check says nothing about the firmware; it withholds a passing
	// verdict, and the battery should be run again on a quieter host.
	HostStall Status = "host_stall"
)

// failOrHost is the status of a check whose answer a did not come as
// asked: HostStall when the host, not the firmware, is the likely cause,
// Fail otherwise.
func failOrHost(a answer) Status {
	if a.hostStalled {
		return HostStall
	}
	return Fail
}

// Result is one check's outcome.
type Result struct {
	Name     string  `json:"name"`     // the check's name (Spec.Name, a Check* constant)
	What     string  `json:"what"`     // what the firmware must do (Spec.What)
	Section  string  `json:"section"`  // where docs/protocol.md asks for it (Spec.Section)
	Required bool    `json:"required"` // the check decides the verdict (Spec.Required)
	Status   Status  `json:"status"`   // pass, fail, skipped, not_run or host_stall (Pass, Fail, Skipped, NotRun, HostStall)
	Seen     string  `json:"seen"`     // what the battery saw, in words
	Seconds  float64 `json:"seconds"`  // wall time the check took
}

// Options configure Run. The zero value runs the battery with its defaults.
type Options struct {
	// Samples is the number of round trips measured with the plant frozen;
	// default 1000.
	Samples int
	// Log gets a line per check as it finishes; nil for none.
	Log func(line string)

	// watchdog and host, set by this package's tests only, replace
	// Watchdog and the host's CPU pressure (hostload.Open), so a test of a
	// silent firmware does not depend on the load of the machine running
	// it, and one of a contended host needs no load.
	watchdog time.Duration
	host     *hostload.Pressure
}

// Report is what Run found.
type Report struct {
	// Link names the link, as the caller gave it.
	Link string `json:"link"`
	// Greeting is what the firmware announced (nil without a greeting).
	Greeting *Firmware `json:"greeting,omitempty"`
	// Checks are the results in battery order.
	Checks []Result `json:"checks"`
	// RoundTrip is the round-trip distribution in µs (Count 0 when none
	// was measured), from hil.Histogram: percentiles to the microsecond,
	// rounded up.
	RoundTrip hil.Summary `json:"round_trip_us"`
	// Samples are the raw round trips RoundTrip summarizes, in the order
	// measured (at most Options.Samples), for a caller that wants the
	// whole distribution.
	Samples []time.Duration `json:"-"`
	// Passed is true when every required check passed (or does not apply
	// to the link).
	Passed bool `json:"passed"`
	// Caution is record.Caution: a firmware that speaks the protocol is
	// not thereby safe to walk.
	Caution string `json:"caution"`
}

// Firmware is what a greeting announced.
type Firmware struct {
	Name      string `json:"name"`      // firmware name
	Build     string `json:"build"`     // firmware build identifier
	Version   uint8  `json:"version"`   // protocol version the firmware speaks
	Actuators uint8  `json:"actuators"` // number of torques the firmware will send
}

// Failed lists the names of the checks that failed (required or not).
func (r *Report) Failed() []string {
	var out []string
	for _, c := range r.Checks {
		if c.Status == Fail {
			out = append(out, c.Name)
		}
	}
	return out
}

// Result returns the named check's result.
func (r *Report) Result(name string) (Result, bool) {
	for _, c := range r.Checks {
		if c.Name == name {
			return c, true
		}
	}
	return Result{}, false
}

// Run runs the battery against the firmware dial reaches and returns the
// report. link names the link in the report. An error is returned only
// when the link cannot be opened at all; everything the firmware does
// wrong is a check result.
func Run(ctx context.Context, link string, dial Dialer, o Options) (Report, error) {
	if o.Samples <= 0 {
		o.Samples = 1000
	}
	if o.watchdog <= 0 {
		o.watchdog = Watchdog
	}
	if o.host == nil {
		o.host = hostload.Open()
		defer o.host.Close()
	}
	b := &battery{ctx: ctx, o: o, rep: Report{Link: link, Caution: record.Caution}}
	conn, closeLink, err := dial()
	if err != nil {
		return Report{Link: link}, err
	}
	b.firstSession(conn)
	if b.stalled != "" {
		b.abandonForHost()
		closeLink()
		b.finish()
		return b.rep, nil
	}
	closeLink()
	b.secondSession(dial)
	b.finish()
	return b.rep, nil
}

// abandonForHost ends the battery after a check the host left unjudged:
// the firmware's late answer to that state would arrive in the next
// check's wait and be judged a stray, so nothing after it can be judged
// either, and waiting on would cost up to hostload.Limit per state on a
// host that stays contended. Every check not yet recorded is HostStall,
// and the firmware is told the session was aborted, so it greets again.
func (b *battery) abandonForHost() {
	done := make(map[string]bool, len(b.rep.Checks))
	for _, c := range b.rep.Checks {
		done[c.Name] = true
	}
	for _, sp := range Checks {
		if !done[sp.Name] {
			b.record(sp.Name, HostStall, time.Now(), "not judged: the host stayed contended during %s; run the battery again on a quieter host", b.stalled)
		}
	}
	if s := b.s; s != nil && !s.gone {
		st := protocol.Message{Version: s.version, Type: protocol.TypeStop, Seq: s.state.Seq,
			Stop: protocol.Stop{Reason: protocol.StopAborted, Text: "conformance: the host stalled"}}
		_ = s.conn.Send(&st)
	}
}

// battery holds the state of one run of the checks.
type battery struct {
	ctx  context.Context
	o    Options
	rep  Report
	s    *session
	hist hil.Histogram
	// stalled names the first check the host left unjudged (HostStall);
	// the battery ends there (abandonForHost).
	stalled string
}

// record adds a check result.
func (b *battery) record(name string, st Status, start time.Time, format string, a ...any) {
	sp := spec(name)
	r := Result{Name: name, What: sp.What, Section: sp.Section, Required: sp.Required, Status: st,
		Seen: fmt.Sprintf(format, a...), Seconds: time.Since(start).Seconds()}
	b.rep.Checks = append(b.rep.Checks, r)
	if st == HostStall && b.stalled == "" {
		b.stalled = name
	}
	if b.o.Log != nil {
		b.o.Log(fmt.Sprintf("%-22s %-7s %s", name, st, r.Seen))
	}
}

// notRun marks every check from names on as not run, with why.
func (b *battery) notRun(why string, names ...string) {
	for _, n := range names {
		b.record(n, NotRun, time.Now(), "not run: %s", why)
	}
}

// finish works out the verdict.
func (b *battery) finish() {
	b.rep.Passed = true
	for _, c := range b.rep.Checks {
		if c.Required && c.Status != Pass && c.Status != Skipped {
			b.rep.Passed = false
		}
	}
}

// firstSession: greeting, config, the state checks and the stop.
func (b *battery) firstSession(conn bridges.Conn) {
	s := newSession(conn, b.o.watchdog, b.o.host)
	b.s = s
	rest := []string{CheckConfig, CheckDuplicate, CheckEveryState, CheckResent, CheckBadCRC, CheckUnknownType,
		CheckHeartbeat, CheckBeltPlace, CheckStatusBits, CheckRoundTrip, CheckStopsOnStop}
	start := time.Now()
	g, seq, err := s.awaitGreeting(b.ctx, GreetingTimeout)
	if err != nil {
		b.record(CheckGreeting, Fail, start, "%v", err)
		b.notRun("no greeting", rest...)
		return
	}
	b.rep.Greeting = &Firmware{Name: g.Name, Build: g.Build, Version: g.Version, Actuators: g.Actuators}
	seen := fmt.Sprintf("name %q, build %q, version %d, %d actuators, seq %d", g.Name, g.Build, g.Version, g.Actuators, seq)
	var probs []string
	if !protocol.KnownVersion(g.Version) {
		probs = append(probs, fmt.Sprintf("version %d, want %d to %d", g.Version, protocol.MinVersion, protocol.Version))
	}
	if g.Actuators < 1 || g.Actuators > protocol.MaxJoints {
		probs = append(probs, fmt.Sprintf("%d actuators, want 1–%d", g.Actuators, protocol.MaxJoints))
	}
	if seq != GreetingSeq {
		probs = append(probs, fmt.Sprintf("seq %d, want %d", seq, GreetingSeq))
	}
	if len(probs) > 0 {
		b.record(CheckGreeting, Fail, start, "%s: %s", seen, strings.Join(probs, "; "))
	} else {
		b.record(CheckGreeting, Pass, start, "%s", seen)
	}
	if g.Actuators < 1 || g.Actuators > protocol.MaxJoints {
		b.notRun("the greeting's actuator count cannot be configured", rest...)
		return
	}
	s.configure(int(g.Actuators))

	// The config, answered by the first state.
	start = time.Now()
	if err := s.sendConfig(&s.config); err != nil {
		b.record(CheckConfig, Fail, start, "sending the config: %v", err)
		b.notRun("the link failed", rest[1:]...)
		return
	}
	a := s.exchange(b.ctx, s.nextState())
	b.judgeAnswer(CheckConfig, start, a)
	if b.ended(a, rest[1:]) {
		return
	}

	// The same config again.
	start = time.Now()
	_ = s.sendConfig(&s.config)
	a = s.exchange(b.ctx, s.nextState())
	b.judgeAnswer(CheckDuplicate, start, a)
	if b.ended(a, rest[2:]) {
		return
	}

	// Every state, and the round trips.
	start = time.Now()
	bad := 0
	var worst answer // the slowest answer
	var first string
	for i := 0; i < b.o.Samples && b.ctx.Err() == nil; i++ {
		a := s.exchange(b.ctx, s.nextState())
		if a.hostStalled {
			// The firmware's late answer would come in the next state's
			// wait and be judged a stray: the battery ends here (Run).
			b.rep.RoundTrip = b.hist.Summarize()
			b.record(CheckEveryState, HostStall, start, "%d states answered, then state seq %d: %s", i, a.seq, a.why)
			return
		}
		if p := a.problem(s); p != "" {
			bad++
			if first == "" {
				first = fmt.Sprintf("state seq %d: %s", a.seq, p)
			}
			if a.gone {
				break
			}
			continue
		}
		b.hist.Add(a.rtt)
		b.rep.Samples = append(b.rep.Samples, a.rtt)
		if a.rtt > worst.rtt {
			worst = a
		}
	}
	b.rep.RoundTrip = b.hist.Summarize()
	switch {
	case bad > 0:
		b.record(CheckEveryState, Fail, start, "%d of %d states not answered as asked; first: %s", bad, b.o.Samples, first)
	case worst.rtt-worst.charged > hostload.StallSlack:
		b.record(CheckEveryState, Pass, start, "%d states, each answered with its seq; slowest answer %v, of it %v charged to the firmware (the rest the battery's own stalls or a contended host; watchdog %v)",
			b.o.Samples, worst.rtt, worst.charged.Round(time.Microsecond), s.wd)
	default:
		b.record(CheckEveryState, Pass, start, "%d states, each answered with its seq; slowest answer %v (watchdog %v)", b.o.Samples, worst.rtt, s.wd)
	}
	if s.gone {
		b.notRun("the link closed", rest[3:]...)
		return
	}

	for _, check := range []func(){
		b.resent,
		func() {
			b.damaged(CheckBadCRC, func(f []byte) { f[len(f)-1] ^= 0xFF }, "a state frame whose CRC's high byte is inverted")
		},
		func() { b.damaged(CheckUnknownType, nil, "a frame of type 0x7E (no such type), CRC correct") },
		b.heartbeat,
		b.beltPlace,
	} {
		check()
		if b.stalled != "" {
			return // Run marks what is left
		}
	}

	start = time.Now()
	switch undef, undefU := s.statusOr&^DefinedStatusBits, s.unlockOr&^DefinedKneeUnlockBits; {
	case undef != 0:
		b.record(CheckStatusBits, Fail, start, "undefined status bits 0x%04X set (in %d of %d commands); defined are 0x%04X", undef, s.undefCount, s.commands, DefinedStatusBits)
	case undefU != 0:
		b.record(CheckStatusBits, Fail, start, "undefined knee_unlock bits 0x%02X set (in %d of %d commands); defined are 0x%02X (left, right knee)", undefU, s.unlockUndef, s.commands, DefinedKneeUnlockBits)
	case s.unlockCount > 0:
		b.record(CheckStatusBits, Pass, start, "%d commands; status bits seen 0x%04X (fault in %d, safe mode in %d); knee_unlock bits 0x%02X in %d", s.commands, s.statusOr, s.faultCount, s.safeCount, s.unlockOr, s.unlockCount)
	default:
		b.record(CheckStatusBits, Pass, start, "%d commands; status bits seen 0x%04X (fault in %d, safe mode in %d)", s.commands, s.statusOr, s.faultCount, s.safeCount)
	}

	start = time.Now()
	if rt := b.rep.RoundTrip; rt.Count > 0 {
		b.record(CheckRoundTrip, Pass, start, "%d round trips: p50 %.0f µs, p99 %.0f µs, max %.0f µs", rt.Count, rt.P50, rt.P99, rt.Max)
	} else {
		b.record(CheckRoundTrip, Fail, start, "no round trip measured")
	}
	b.stop()
}

// ended marks the checks left as not run when the answer shows the session
// is over (the firmware stopped it, or the link closed), and says so.
func (b *battery) ended(a answer, left []string) bool {
	switch {
	case b.stalled != "":
		return true // Run marks what is left
	case a.stop != nil:
		b.notRun(fmt.Sprintf("the firmware ended the session (stop reason %d, %q)", a.stop.Reason, a.stop.Text), left...)
	case a.gone:
		b.notRun("the link closed", left...)
	default:
		return false
	}
	return true
}

// judgeAnswer records a check that asks for one right answer to one state.
func (b *battery) judgeAnswer(name string, start time.Time, a answer) {
	if p := a.problem(b.s); p != "" {
		b.record(name, failOrHost(a), start, "state seq %d: %s", a.seq, p)
		return
	}
	b.record(name, Pass, start, "state seq %d answered in %v", a.seq, a.rtt)
}

// resent sends the last state again and expects exactly one more answer
// with the same seq and the same torques; the next state's answer bounds
// the count (the link keeps order, so no timing is involved).
func (b *battery) resent() {
	s := b.s
	start := time.Now()
	a := s.exchange(b.ctx, s.nextState())
	if p := a.problem(s); p != "" {
		b.record(CheckResent, failOrHost(a), start, "the state before the resend: seq %d: %s", a.seq, p)
		return
	}
	firstCmd := s.lastCmd
	again := s.exchange(b.ctx, &s.state) // same seq, same contents
	if p := again.problem(s); p != "" {
		b.record(CheckResent, failOrHost(again), start, "resent state seq %d: %s", again.seq, p)
		return
	}
	againCmd := s.lastCmd
	sameTorque := againCmd == firstCmd
	s.extraFor = again.seq
	s.extra = 0
	next := s.exchange(b.ctx, s.nextState())
	s.extraFor = math.MaxUint32
	switch {
	case next.problem(s) != "":
		b.record(CheckResent, failOrHost(next), start, "the state after the resend: seq %d: %s", next.seq, next.problem(s))
	case 1+s.extra != ResentAnswers:
		b.record(CheckResent, Fail, start, "resent state seq %d answered %d times, want %d", again.seq, 1+s.extra, ResentAnswers)
	case !sameTorque:
		b.record(CheckResent, Fail, start, "resent state seq %d got a different command: torques %v status %d, first %v status %d", again.seq, againCmd.Torque[:s.n], againCmd.Status, firstCmd.Torque[:s.n], firstCmd.Status)
	default:
		b.record(CheckResent, Pass, start, "state seq %d answered again once, same command", again.seq)
	}
}

// damaged sends one damaged frame (a state whose bytes corrupt changes, or,
// with corrupt nil, a frame of an unknown type) with the next seq, then a
// good state with the seq after it, and expects the good one answered and
// nothing for the damaged one.
func (b *battery) damaged(name string, corrupt func([]byte), what string) {
	s := b.s
	start := time.Now()
	fs, ok := s.conn.(FrameSender)
	if !ok {
		b.record(name, Skipped, start, "this link carries decoded messages, not bytes: no damaged frame can be sent over it")
		return
	}
	bad := s.nextState()
	var frame []byte
	if corrupt != nil {
		var buf [protocol.MaxFrameLen]byte
		n, err := protocol.Encode(buf[:], bad)
		if err != nil {
			b.record(name, Fail, start, "encoding the state: %v", err)
			return
		}
		frame = append([]byte(nil), buf[:n]...)
		corrupt(frame)
	} else {
		frame = unknownTypeFrame(s.version, bad.Seq)
	}
	if err := fs.SendFrame(frame); err != nil {
		b.record(name, Fail, start, "sending the damaged frame: %v", err)
		return
	}
	s.extraFor, s.extra = bad.Seq, 0
	a := s.exchange(b.ctx, s.nextState())
	s.extraFor = math.MaxUint32
	switch {
	case s.extra > 0:
		b.record(name, Fail, start, "answered %s (seq %d) with a command", what, bad.Seq)
	case a.problem(s) != "":
		b.record(name, failOrHost(a), start, "after %s: state seq %d: %s", what, a.seq, a.problem(s))
	default:
		b.record(name, Pass, start, "ignored %s; state seq %d answered", what, a.seq)
	}
}

// unknownTypeFrame is a well-formed frame of type 0x7E with no payload.
func unknownTypeFrame(version uint8, seq uint32) []byte {
	f := make([]byte, protocol.MinFrameLen)
	f[0] = version
	f[1] = 0x7E
	f[2], f[3], f[4], f[5] = byte(seq), byte(seq>>8), byte(seq>>16), byte(seq>>24)
	crc := protocol.CRC16(f[:protocol.HeaderLen])
	f[8], f[9] = byte(crc), byte(crc>>8)
	return f
}

// heartbeat sends a heartbeat (seq of the latest state, section 6 item 4),
// then a state, and expects the state answered (and a heartbeat back first,
// if the document asks for one).
func (b *battery) heartbeat() {
	s := b.s
	start := time.Now()
	hb := protocol.Message{Version: s.version, Type: protocol.TypeHeartbeat, Seq: s.state.Seq}
	before := s.heartbeats
	if err := s.conn.Send(&hb); err != nil {
		b.record(CheckHeartbeat, Fail, start, "sending the heartbeat: %v", err)
		return
	}
	a := s.exchange(b.ctx, s.nextState())
	got := s.heartbeats - before
	switch {
	case a.problem(s) != "":
		b.record(CheckHeartbeat, failOrHost(a), start, "after a heartbeat: state seq %d: %s", a.seq, a.problem(s))
	case HeartbeatAnswerRequired && got == 0:
		b.record(CheckHeartbeat, Fail, start, "no heartbeat came back before the next command")
	default:
		b.record(CheckHeartbeat, Pass, start, "state seq %d answered after a heartbeat; %d heartbeats from the firmware so far", a.seq, s.heartbeats)
	}
}

// stop sends a stop (reason end) and then one more state, and expects no
// command for the watchdog time.
func (b *battery) stop() {
	s := b.s
	start := time.Now()
	st := protocol.Message{Version: s.version, Type: protocol.TypeStop, Seq: s.state.Seq, Stop: protocol.Stop{Reason: protocol.StopEnd, Text: "conformance: end"}}
	if err := s.conn.Send(&st); err != nil {
		b.record(CheckStopsOnStop, Fail, start, "sending the stop: %v", err)
		return
	}
	after := s.nextState()
	_ = s.conn.Send(after) // a link the firmware closed refuses it: that is fine
	a := s.awaitFor(b.ctx, after.Seq, s.wd)
	if a.cmd {
		b.record(CheckStopsOnStop, Fail, start, "answered state seq %d sent after the stop", a.seq)
		return
	}
	b.record(CheckStopsOnStop, Pass, start, "no command within %v after the stop (%s)", s.wd, a.why)
}

// secondSession restarts the link: a greeting again, then a config the
// firmware cannot drive.
func (b *battery) secondSession(dial Dialer) {
	start := time.Now()
	if b.rep.Greeting == nil {
		b.notRun("no greeting in the first session", CheckGreetsAgain, CheckRefusesBadConf)
		return
	}
	// The link just closed may not be released yet by the other side: the
	// embedded broker refuses a client id while it still holds that
	// client's old connection, and a port driver may hold a device
	// briefly. So a failed dial is tried again, within the handshake time,
	// as a person restarting the rig would; the attempts are reported.
	var conn bridges.Conn
	var closeLink func()
	var err error
	attempts := 0
	for {
		attempts++
		conn, closeLink, err = dial()
		if err == nil || time.Since(start) >= GreetingTimeout || b.ctx.Err() != nil {
			break
		}
		select {
		case <-b.ctx.Done():
		case <-time.After(redialEvery):
		}
	}
	if err != nil {
		b.record(CheckGreetsAgain, Fail, start, "opening the link again (%d attempts in %v): %v", attempts, time.Since(start).Round(time.Millisecond), err)
		b.notRun("the link could not be opened again", CheckRefusesBadConf)
		return
	}
	defer closeLink()
	s := newSession(conn, b.o.watchdog, b.o.host)
	g, _, err := s.awaitGreeting(b.ctx, GreetingTimeout)
	if err != nil {
		b.record(CheckGreetsAgain, Fail, start, "after the link was opened again: %v", err)
		b.notRun("no greeting after the restart (reset the board and run again)", CheckRefusesBadConf)
		return
	}
	reopened := ""
	if attempts > 1 {
		reopened = fmt.Sprintf(" (the link opened at attempt %d)", attempts)
	}
	b.record(CheckGreetsAgain, Pass, start, "greeted again: name %q, %d actuators%s", g.Name, g.Actuators, reopened)

	start = time.Now()
	n := int(g.Actuators)
	bad := n + 1
	if bad > protocol.MaxJoints {
		bad = n - 1
	}
	s.configure(bad)
	if err := s.sendConfig(&s.config); err != nil {
		b.record(CheckRefusesBadConf, Fail, start, "sending the config: %v", err)
		return
	}
	st := s.nextState() // a firmware that took the config would answer it
	var busy hostload.WaitCredit
	busy.Start(s.host)
	sent := time.Now()
	_ = s.conn.Send(st)
	a := s.awaitAnswer(b.ctx, st.Seq, sent, &busy)
	switch {
	case a.stop != nil && a.stop.Reason == RefusalReason:
		b.record(CheckRefusesBadConf, Pass, start, "a config of %d joints for %d actuators: stop reason %d (%s) %q", bad, n, a.stop.Reason, protocol.StopReasonName(a.stop.Reason), a.stop.Text)
	case a.stop != nil:
		b.record(CheckRefusesBadConf, Fail, start, "a config of %d joints for %d actuators: stop reason %d (%s) %q, want %d (%s)", bad, n, a.stop.Reason, protocol.StopReasonName(a.stop.Reason), a.stop.Text, RefusalReason, protocol.StopReasonName(RefusalReason))
	case a.cmd:
		b.record(CheckRefusesBadConf, Fail, start, "a config of %d joints for %d actuators was taken: state seq %d answered", bad, n, a.seq)
	default:
		b.record(CheckRefusesBadConf, failOrHost(a), start, "a config of %d joints for %d actuators: no stop within %v (%s)", bad, n, s.wd, a.why)
	}
}

// redialEvery is the pause between attempts to open the link again for the
// second session.
const redialEvery = 100 * time.Millisecond

// errLinkGone is how a session reports a link that closed under it.
var errLinkGone = errors.New("the link closed")

// beltPlace sends one state of a treadmill run (docs/protocol.md section
// 3.3.1: contacts bit 2 set, belt_mm BeltPlaceMM) and then a plain one;
// both must be answered, neither with the fault bit. A board written
// before the field ignores it; one that refuses the frame, drops the state
// or calls it a fault fails.
func (b *battery) beltPlace() {
	s := b.s
	start := time.Now()
	st := s.nextState()
	st.State.Contacts |= protocol.ContactBelt
	st.State.BeltMM = BeltPlaceMM
	a := s.exchange(b.ctx, st)
	if p := a.problem(s); p != "" {
		b.record(CheckBeltPlace, failOrHost(a), start, "state seq %d with a belt place of %d mm: %s", a.seq, BeltPlaceMM, p)
		return
	}
	if s.lastCmd.Status&protocol.StatusFault != 0 {
		b.record(CheckBeltPlace, Fail, start, "state seq %d with a belt place of %d mm answered with the fault bit", a.seq, BeltPlaceMM)
		return
	}
	next := s.exchange(b.ctx, s.nextState())
	if p := next.problem(s); p != "" {
		b.record(CheckBeltPlace, failOrHost(next), start, "the plain state after the belt state: seq %d: %s", next.seq, p)
		return
	}
	b.record(CheckBeltPlace, Pass, start, "state seq %d with a belt place of %d mm answered in %v, and the next", a.seq, BeltPlaceMM, a.rtt)
}
