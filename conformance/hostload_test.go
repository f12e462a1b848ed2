package conformance

import (
	"context"
	"runtime"
	"strings"
	"sync"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/internal/hostload"
)

// withheldConn passes everything through to the board, but holds back the
// state with seq at: for hold, then sends it (a firmware the host did not
// run for that long), or for ever when hold is negative (a firmware that
// lost it).
type withheldConn struct {
	bridges.Conn
	at   uint32
	hold time.Duration
	mu   sync.Mutex // the late send runs on a timer's goroutine
}

func (c *withheldConn) Send(m *protocol.Message) error {
	c.mu.Lock()
	defer c.mu.Unlock()
	if m.Type != protocol.TypeState || m.Seq != c.at {
		return c.Conn.Send(m)
	}
	if c.hold < 0 {
		return nil
	}
	held := *m
	time.AfterFunc(c.hold, func() {
		c.mu.Lock()
		defer c.mu.Unlock()
		_ = c.Conn.Send(&held)
	})
	return nil
}

// withholding dials the faultless test board through a withheldConn.
func withholding(t *testing.T, at uint32, hold time.Duration) Dialer {
	board := startBoard(t, faultNone)
	return func() (bridges.Conn, func(), error) {
		c, closeLink, err := board()
		if err != nil {
			return nil, nil, err
		}
		return &withheldConn{Conn: c, at: at, hold: hold}, closeLink, nil
	}
}

// contended is a host whose CPUs have been contended all the time since it
// was made, as the host-wide PSI figure would report it on a host of cpus
// CPUs, busy of them busy (kernel/sched/psi.c averages the stall over the
// non-idle CPUs; see hostload.BusyCPUs).
func contended(cpus int, busy float64) *hostload.Pressure {
	t0 := time.Now()
	return hostload.Fake(cpus,
		func() (time.Duration, bool) { return time.Duration(float64(time.Since(t0)) / busy), true },
		func() (hostload.CPUTimes, bool) {
			ticks := time.Since(t0).Seconds() * hostload.UserHZ
			return hostload.CPUTimes{Nonidle: int64(busy * ticks), All: int64(float64(cpus) * ticks)}, true
		})
}

// The battery judges a state's answer as the rig's lockstep loop does
// (issue 9: host trouble is never blamed on the firmware). The firmware
// gets state 10 three watchdogs late, as one the host did not run would:
// on a quiet host that fails every_state_answered, on a host whose CPUs
// were contended all the while it passes, since none of that time is
// charged. (Before, the battery charged the wall clock, and a C firmware
// starved for a second on a loaded CI runner failed this check.)
func TestBatteryCreditsAContendedHost(t *testing.T) {
	const wd = 50 * time.Millisecond
	for _, tc := range []struct {
		name string
		host *hostload.Pressure
		want Status
	}{
		{"quiet host", hostload.Quiet(), Fail},
		{"contended host", contended(runtime.NumCPU(), float64(runtime.NumCPU())), Pass},
	} {
		t.Run(tc.name, func(t *testing.T) {
			ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
			defer cancel()
			rep, err := Run(ctx, "test board", withholding(t, 10, 3*wd), Options{Samples: 20, watchdog: wd, host: tc.host})
			if err != nil {
				t.Fatal(err)
			}
			r, _ := rep.Result(CheckEveryState)
			if r.Status != tc.want {
				t.Fatalf("%s: %s (%s), want %s", r.Name, r.Status, r.Seen, tc.want)
			}
			if tc.want == Fail && !strings.Contains(r.Seen, "state seq 10: no command with seq 10 within 50ms") {
				t.Errorf("seen %q: want state 10 named", r.Seen)
			}
		})
	}
}

// A firmware that lost a state is still caught on a contended host: on a
// large host with few CPUs busy the credit, weighed by the busy CPUs at the
// limit, leaves more than a watchdog charged, and the check fails; on a
// small saturated host the host never left the firmware a watchdog, and
// the check says host_stall, withholds a passing verdict and is a JUnit
// error, not a failure.
func TestBatteryLostStateOnAContendedHost(t *testing.T) {
	const wd = 50 * time.Millisecond
	for _, tc := range []struct {
		name string
		host func() *hostload.Pressure
		want Status
	}{
		{"large host, few CPUs busy", largeHalfBusy, Fail},
		{"small saturated host", func() *hostload.Pressure { return contended(2, 2) }, HostStall},
	} {
		t.Run(tc.name, func(t *testing.T) {
			host := tc.host()
			ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
			defer cancel()
			start := time.Now()
			rep, err := Run(ctx, "test board", withholding(t, 10, -1), Options{Samples: 20, watchdog: wd, host: host})
			if err != nil {
				t.Fatal(err)
			}
			r, _ := rep.Result(CheckEveryState)
			if r.Status != tc.want {
				t.Fatalf("%s: %s (%s), want %s", r.Name, r.Status, r.Seen, tc.want)
			}
			if rep.Passed {
				t.Error("a passing verdict with a lost state")
			}
			if took := time.Since(start); tc.want == HostStall && took < hostload.Limit(wd) {
				t.Errorf("host_stall after %v, before the limit %v", took, hostload.Limit(wd))
			}
			var junit strings.Builder
			if err := rep.WriteJUnit(&junit); err != nil {
				t.Fatal(err)
			}
			x := junit.String()
			i := strings.Index(x, `name="`+CheckEveryState+`"`)
			j := strings.Index(x[i:], "</testcase>")
			if i < 0 || j < 0 {
				t.Fatalf("no test case %s in\n%s", CheckEveryState, x)
			}
			tag := "<failure"
			if tc.want == HostStall {
				tag = "<error"
			}
			if !strings.Contains(x[i:i+j], tag) {
				t.Errorf("JUnit case %s has no %s:\n%s", CheckEveryState, tag, x[i:i+j])
			}
		})
	}
}

// largeHalfBusy is a host of 64 CPUs, 8 of them busy, on which one task
// waits half the time: PSI grows at 0.5/8 (the figure averaged over the
// busy CPUs).
func largeHalfBusy() *hostload.Pressure {
	t0 := time.Now()
	return hostload.Fake(64,
		func() (time.Duration, bool) { return time.Duration(0.5 / 8 * float64(time.Since(t0))), true },
		func() (hostload.CPUTimes, bool) {
			ticks := time.Since(t0).Seconds() * hostload.UserHZ
			return hostload.CPUTimes{Nonidle: int64(8 * ticks), All: int64(64 * ticks)}, true
		})
}
