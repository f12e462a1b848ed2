package hil

import (
	"context"
	"runtime"
	"sync/atomic"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/internal/hostload"
	"gaitrig/record"
)

// sleepySend stalls the rig on purpose: the Send of state `at` sleeps for
// `stall` on the loop's own thread, as a host that stops running the rig
// would (the thread neither runs nor sleeps as the pacer asked). It is
// deterministic: the stall happens at one known state, whatever the load.
type sleepySend struct {
	bridges.Conn
	at    uint32
	stall time.Duration
}

func (s *sleepySend) Send(m *protocol.Message) error {
	if m.Type == protocol.TypeState && m.Seq == s.at {
		time.Sleep(s.stall)
	}
	return s.Conn.Send(m)
}

// silentFirmware greets and then never answers a state.
var silentFirmware = hooked(func(bridges.Conn, uint32, *protocol.Command) bool { return false }, nil)

// A wall-clock run whose loop the host stalls for longer than the
// watchdog is not a firmware failure: it ends as invalid with host_stall,
// and no watchdog alarm is raised. A firmware that is gone still trips the
// watchdog. Neither assertion depends on how busy the host is: a real
// stall of a loaded host before the planted one also gives host_stall.
func TestWallclockHostStallIsNotAWatchdogTrip(t *testing.T) {
	t.Run("rig stalled", func(t *testing.T) {
		m, s, cfg := timedDemo(t, 2)
		cfg.Clock = Wallclock
		cfg.Watchdog = 100 * time.Millisecond
		rig, fw := inprocPair()
		defer rig.Close()
		go referenceFirmware(fw)
		rec := newRecord(t, cfg, m, s)
		res, err := Run(context.Background(), cfg, m, s, &sleepySend{Conn: rig, at: 200, stall: 400 * time.Millisecond}, rec)
		if err != nil {
			t.Fatal(err)
		}
		sum := openRun(t, rec.Dir()).Summary
		if res.Summary.Outcome != record.Invalid || sum.Outcome != record.Invalid {
			t.Fatalf("outcome %s / summary.json %s (%s), want invalid", res.Summary.Outcome, sum.Outcome, res.Summary.Reason)
		}
		if sum.Alarms[AlarmHostStall] != 1 || sum.Alarms[AlarmWatchdog] != 0 {
			t.Fatalf("alarms %v: want one host_stall and no watchdog", sum.Alarms)
		}
		if sum.LongestHostStallS < 0.1 || sum.HostStallS < sum.LongestHostStallS {
			t.Errorf("stall figures: longest %g s, total %g s; want at least the watchdog (0.1 s)", sum.LongestHostStallS, sum.HostStallS)
		}
		ev := eventsOf(t, rec.Dir(), AlarmHostStall)
		if len(ev) == 0 || ev[len(ev)-1].Severity != record.Trip || ev[len(ev)-1].Values["stall_ms"] < 100 {
			t.Fatalf("host_stall events %+v", ev)
		}
	})
	t.Run("firmware gone", func(t *testing.T) {
		m, s, cfg := timedDemo(t, 2)
		cfg.Clock = Wallclock
		cfg.Watchdog = 100 * time.Millisecond
		res, _, err, _ := runWith(t, context.Background(), cfg, m, s, silentFirmware)
		if err != nil {
			t.Fatal(err)
		}
		if res.Summary.Outcome != record.Tripped || res.Summary.Alarms[AlarmWatchdog] != 1 {
			t.Fatalf("outcome %s (%s), alarms %v: want a watchdog trip", res.Summary.Outcome, res.Summary.Reason, res.Summary.Alarms)
		}
	})
}

// In lockstep simulated time waits for the firmware: a rig stalled for ten
// times the watchdog, outside its wait (in Send) or inside it (a wait
// that overslept), passes with the stall counted, and a firmware that is
// gone still trips the watchdog after it.
func TestLockstepHostStallDoesNotTripTheWatchdog(t *testing.T) {
	t.Run("stall in send", func(t *testing.T) {
		m, s, cfg := timedDemo(t, 0.3)
		cfg.Watchdog = 30 * time.Millisecond
		rig, fw := inprocPair()
		defer rig.Close()
		go referenceFirmware(fw)
		res, err := Run(context.Background(), cfg, m, s, &sleepySend{Conn: rig, at: 100, stall: 300 * time.Millisecond}, nil)
		if err != nil {
			t.Fatal(err)
		}
		if res.Summary.Outcome != record.Pass || res.Summary.Alarms[AlarmWatchdog] != 0 {
			t.Fatalf("%s (%s), alarms %v", res.Summary.Outcome, res.Summary.Reason, res.Summary.Alarms)
		}
	})
	t.Run("stall in the wait", func(t *testing.T) {
		m, s, cfg := timedDemo(t, 0.05)
		cfg.Watchdog = 30 * time.Millisecond
		cfg.Resend = time.Second
		rig, fw := inprocPair()
		defer rig.Close()
		go referenceFirmware(fw)
		res, err := Run(context.Background(), cfg, m, s, &stallConn{Conn: rig}, nil)
		if err != nil {
			t.Fatal(err)
		}
		sum := res.Summary
		if sum.Outcome != record.Pass || sum.Alarms[AlarmWatchdog] != 0 || sum.Alarms[AlarmHostStall] != 0 {
			t.Fatalf("%s (%s), alarms %v", sum.Outcome, sum.Reason, sum.Alarms)
		}
		// stallConn oversleeps three Recv calls by 100 ms each; the first
		// may fall in the handshake, which has no watchdog.
		if sum.HostStallS < 0.2 {
			t.Errorf("host stall %g s counted, want at least the 0.2 s planted in the loop's waits", sum.HostStallS)
		}
	})
	t.Run("firmware gone", func(t *testing.T) {
		m, s, cfg := timedDemo(t, 0.3)
		cfg.Watchdog = 30 * time.Millisecond
		cfg.pressure = quietHost
		res, _, err, _ := runWith(t, context.Background(), cfg, m, s, silentFirmware)
		if err != nil {
			t.Fatal(err)
		}
		if res.Summary.Outcome != record.Tripped || res.Summary.Alarms[AlarmWatchdog] != 1 {
			t.Fatalf("outcome %s, alarms %v: want a watchdog trip", res.Summary.Outcome, res.Summary.Alarms)
		}
	})
	// Half the time contended: the firmware still gets a watchdog of
	// uncontended time before the limit, so a gone firmware trips the
	// watchdog, later than on a quiet host.
	t.Run("firmware gone on a half-busy host", func(t *testing.T) {
		m, s, cfg := timedDemo(t, 0.3)
		cfg.Watchdog = 30 * time.Millisecond
		cfg.pressure = busyHost(0.5)
		res, dir, err, _ := runWith(t, context.Background(), cfg, m, s, silentFirmware)
		if err != nil {
			t.Fatal(err)
		}
		if res.Summary.Outcome != record.Tripped || res.Summary.Alarms[AlarmWatchdog] != 1 {
			t.Fatalf("outcome %s (%s), alarms %v: want a watchdog trip", res.Summary.Outcome, res.Summary.Reason, res.Summary.Alarms)
		}
		wd := eventsOf(t, dir, AlarmWatchdog)
		if len(wd) != 1 || wd[0].Values["contended_ms"] <= 0 || wd[0].Values["silent_ms"] < 30 {
			t.Fatalf("watchdog events %+v: want the contended time named", wd)
		}
	})
	// Contended all the time: the host never leaves the firmware a
	// watchdog to answer in, so at the limit the run is invalid
	// (host_stall), not a watchdog trip blamed on the firmware.
	t.Run("silent on a saturated host", func(t *testing.T) {
		m, s, cfg := timedDemo(t, 0.3)
		cfg.Watchdog = 30 * time.Millisecond
		cfg.pressure = busyHost(1)
		res, _, err, _ := runWith(t, context.Background(), cfg, m, s, silentFirmware)
		if err != nil {
			t.Fatal(err)
		}
		sum := res.Summary
		if sum.Outcome != record.Invalid || sum.Alarms[AlarmHostStall] != 1 || sum.Alarms[AlarmWatchdog] != 0 {
			t.Fatalf("outcome %s (%s), alarms %v: want invalid with host_stall", sum.Outcome, sum.Reason, sum.Alarms)
		}
	})
}

// quietHost is a CPU pressure source that never reports contention.
var quietHost = hostload.Quiet()

// busyHost reports the host's CPUs contended for the fraction share of the
// time since it was made, as the host-wide PSI figure would (divided by
// the CPU count: the loop multiplies it back).
func busyHost(share float64) *hostload.Pressure {
	t0 := time.Now()
	n := float64(runtime.NumCPU())
	return hostload.Fake(0, func() (time.Duration, bool) {
		return time.Duration(share * float64(time.Since(t0)) / n), true
	}, nil)
}

// lateWithStaleConn plays a rig the host did not run while it waited for
// the answer to state `at`: that wait ends three watchdogs after its
// deadline, not with a timeout but with a stale command that came
// meanwhile (as it does when the host finally runs the rig). The state
// itself reaches the firmware only after that, so its answer comes after
// the stale one, as the answer to a state the host also delayed would.
type lateWithStaleConn struct {
	bridges.Conn
	at      uint32
	stall   time.Duration
	held    protocol.Message
	holding bool
	done    bool
}

func (c *lateWithStaleConn) Send(m *protocol.Message) error {
	if m.Type == protocol.TypeState && m.Seq == c.at && !c.done {
		c.held, c.holding = *m, true
		return nil
	}
	return c.Conn.Send(m)
}

func (c *lateWithStaleConn) Recv(deadline time.Time, m *protocol.Message) error {
	if c.holding && !c.done {
		c.done = true
		time.Sleep(time.Until(deadline) + c.stall)
		*m = protocol.Message{Type: protocol.TypeCommand, Seq: c.at - 1}
		m.Command.Joints = 2
		return nil
	}
	if c.holding {
		c.holding = false
		if err := c.Conn.Send(&c.held); err != nil {
			return err
		}
	}
	return c.Conn.Recv(deadline, m)
}

// A stall of the rig that ends with a message rather than a timeout is the
// rig's own time too: the watchdog does not trip on it, the stall is
// counted, and the run walks on. (Before, only waits that ended with a
// timeout were measured, and a saturated host tripped the watchdog of a
// firmware that answered as soon as it was asked.)
func TestLockstepStallEndingWithAMessageIsTheRigs(t *testing.T) {
	m, s, cfg := timedDemo(t, 0.1)
	cfg.Watchdog = 30 * time.Millisecond
	cfg.Resend = time.Second
	cfg.pressure = quietHost // only the rig's own measure may excuse the stall
	rig, fw := inprocPair()
	defer rig.Close()
	go referenceFirmware(fw)
	res, err := Run(context.Background(), cfg, m, s, &lateWithStaleConn{Conn: rig, at: 40, stall: 3 * cfg.Watchdog}, nil)
	if err != nil {
		t.Fatal(err)
	}
	sum := res.Summary
	if sum.Outcome != record.Pass || sum.Alarms[AlarmWatchdog] != 0 || res.Link.StaleCommands == 0 {
		t.Fatalf("%s (%s), alarms %v, link %+v: want a pass with the stale command counted", sum.Outcome, sum.Reason, sum.Alarms, res.Link)
	}
	if sum.HostStallS < 0.09 {
		t.Errorf("host stall %g s counted, want at least the 0.09 s planted", sum.HostStallS)
	}
}

// fakeHost is a host of cpus CPUs, busy of them busy, on which the
// host-wide PSI "some" figure grows at rate some per second (as
// /proc/pressure/cpu would report it) since it was made.
func fakeHost(cpus int, busy, some float64) *hostload.Pressure {
	t0 := time.Now()
	return hostload.Fake(cpus,
		func() (time.Duration, bool) { return time.Duration(some * float64(time.Since(t0))), true },
		func() (hostload.CPUTimes, bool) {
			ticks := time.Since(t0).Seconds() * hostload.UserHZ
			return hostload.CPUTimes{Nonidle: int64(busy * ticks), All: int64(float64(cpus) * ticks)}, true
		})
}

// The verdict on a firmware that stays silent weighs the host's pressure
// by the CPUs that were busy, not by all of them (issue 9, hoststall
// credit). On a large host with a few CPUs busy and one task waiting half
// the time, the pressure times the CPU count would excuse the whole wait
// and end the run invalid; the firmware that is gone must trip the
// watchdog. On a small saturated host the same silence stays invalid.
func TestLockstepVerdictWeighsPressureByBusyCPUs(t *testing.T) {
	tests := []struct {
		name string
		host *hostload.Pressure
		want record.Outcome
	}{
		// 64 CPUs, 8 busy, one of them with a task waiting half the time:
		// PSI grows at 0.5/8 (kernel/sched/psi.c weights by non-idle time).
		{"large host, few CPUs busy", fakeHost(64, 8, 0.5/8), record.Tripped},
		// 2 CPUs, both busy, a task waiting on each all the time.
		{"small saturated host", fakeHost(2, 2, 1), record.Invalid},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			m, s, cfg := timedDemo(t, 0.3)
			cfg.Watchdog = 30 * time.Millisecond
			cfg.pressure = tc.host
			res, _, err, _ := runWith(t, context.Background(), cfg, m, s, silentFirmware)
			if err != nil {
				t.Fatal(err)
			}
			sum := res.Summary
			if sum.Outcome != tc.want {
				t.Fatalf("outcome %s (%s), alarms %v; want %s", sum.Outcome, sum.Reason, sum.Alarms, tc.want)
			}
		})
	}
}

// freezeCtx stalls the rig between two waits: once armed, the next look at
// the context (the loop's check for an interrupt, in its own code between
// waits) sleeps for d, as a host that stops running the rig there would.
type freezeCtx struct {
	context.Context
	armed atomic.Bool
	d     time.Duration
}

func (c *freezeCtx) Done() <-chan struct{} {
	if c.armed.CompareAndSwap(true, false) {
		time.Sleep(c.d)
	}
	return c.Context.Done()
}

// heldStateConn holds state `at` back from the firmware until the rig's
// wait after the freeze, and arms the freeze in the first wait for its
// answer: the firmware's answer can only come after the stall.
type heldStateConn struct {
	bridges.Conn
	ctx     *freezeCtx
	at      uint32
	held    protocol.Message
	holding bool
	waits   int
}

func (c *heldStateConn) Send(m *protocol.Message) error {
	if m.Type == protocol.TypeState && m.Seq == c.at && c.waits == 0 {
		c.held, c.holding = *m, true
		return nil
	}
	return c.Conn.Send(m)
}

func (c *heldStateConn) Recv(deadline time.Time, m *protocol.Message) error {
	if c.holding {
		c.waits++
		if c.waits == 1 {
			c.ctx.armed.Store(true)
		} else {
			c.holding = false
			if err := c.Conn.Send(&c.held); err != nil {
				return err
			}
		}
	}
	return c.Conn.Recv(deadline, m)
}

// A stall of the rig in its own code between two waits (not inside a wait,
// where a late wake-up shows it) is the rig's time too: the watchdog does
// not trip on it. (Before, only waits that ended late were measured, and a
// rig frozen between a wait and its watchdog check blamed the firmware.)
func TestLockstepStallBetweenWaitsIsTheRigs(t *testing.T) {
	m, s, cfg := timedDemo(t, 0.1)
	cfg.Watchdog = 30 * time.Millisecond
	cfg.Resend = time.Second
	cfg.pressure = quietHost // only the rig's own measure may excuse the stall
	rig, fw := inprocPair()
	defer rig.Close()
	go referenceFirmware(fw)
	ctx := &freezeCtx{Context: context.Background(), d: 3 * cfg.Watchdog}
	res, err := Run(ctx, cfg, m, s, &heldStateConn{Conn: rig, ctx: ctx, at: 40}, nil)
	if err != nil {
		t.Fatal(err)
	}
	sum := res.Summary
	if sum.Outcome != record.Pass || sum.Alarms[AlarmWatchdog] != 0 {
		t.Fatalf("%s (%s), alarms %v: want a pass", sum.Outcome, sum.Reason, sum.Alarms)
	}
	if sum.HostStallS < 0.09 {
		t.Errorf("host stall %g s counted, want at least the 0.09 s planted", sum.HostStallS)
	}
}

// After one slow answer the loop watches the host's pressure from the
// start of the next watchEarlyTicks exchanges, and then no more: fast
// answers do not start the count again (each early watch costs a system
// call on a tick of a quiet run).
func TestEarlyWatchEndsAfterFastAnswers(t *testing.T) {
	m, s, cfg := timedDemo(t, 2.5) // 2500 ticks: one slow answer, then 2400 fast
	cfg.pressure = quietHost
	// An answer is slow past min(resend, watchdog/4) = 2 s here: one
	// delayed on purpose by more is slow on any host, and no other answer
	// is, however busy the host (the test does not depend on its load).
	cfg.Resend, cfg.Watchdog = 2*time.Second, 10*time.Second
	rigEnd, fwEnd := inprocPair()
	defer rigEnd.Close()
	r, err := newRunner(cfg, m, s, rigEnd, nil)
	if err != nil {
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() {
		// The reference firmware, its answer to state 100 slow.
		done <- referenceFirmware(&slowAnswer{Conn: fwEnd, seq: 100, delay: r.cfg.Resend + 100*time.Millisecond})
	}()
	res, err := r.run(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	fwEnd.Close()
	<-done
	if res.Summary.Ticks < 2500 {
		t.Fatalf("run ended %s after %d ticks (%s)", res.Summary.Outcome, res.Summary.Ticks, res.Summary.Reason)
	}
	t.Logf("resend %v, watchdog %v, stalls %+v", r.cfg.Resend, r.cfg.Watchdog, r.stalls)
	if r.stalls.watchEarly != 0 {
		t.Errorf("%d early watches still to come after 2400 fast answers: a slow answer's count never ran out", r.stalls.watchEarly)
	}
}

// slowAnswer delays the firmware's command answering one state.
type slowAnswer struct {
	bridges.Conn
	seq   uint32
	delay time.Duration
}

func (c *slowAnswer) Send(m *protocol.Message) error {
	if m.Type == protocol.TypeCommand && m.Seq == c.seq {
		time.Sleep(c.delay)
	}
	return c.Conn.Send(m)
}
