package hil

import (
	"context"
	"errors"
	"fmt"
	"math"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/internal/retrytest"
	"gaitrig/record"
)

// A bounded wall-clock run at 1 kHz against the reference firmware over
// the in-process link: every tick is accounted for and the latency and
// jitter figures are filled. Timing numbers are only logged: speed is for
// benchmarks, not for asserts.
func TestWallclockInproc1kHz(t *testing.T) {
	m, s, cfg := timedDemo(t, 0.5)
	cfg.Clock = Wallclock
	cfg.Watchdog = time.Second // generous: other tests share the 2 cores
	var lines []string
	cfg.Log = func(l string) { lines = append(lines, l) }
	res, _, ticks := runAndRead(t, context.Background(), cfg, m, s, referenceFirmware)
	sum := res.Summary
	if sum.Ticks != 500 {
		t.Fatalf("%d ticks in 0.5 s at 1 kHz, want 500", sum.Ticks)
	}
	if sum.Outcome == record.Tripped || sum.Outcome == record.Aborted {
		t.Fatalf("outcome %s (%s)", sum.Outcome, sum.Reason)
	}
	if sum.LatencyUS == nil || sum.JitterUS == nil || sum.JitterUS.Count != 500 {
		t.Fatalf("summary latency %v jitter %v; want both, the jitter of all 500 ticks", sum.LatencyUS, sum.JitterUS)
	}
	if res.Realtime == "" {
		t.Error("no word on the scheduling class")
	}
	if len(ticks) != 500 {
		t.Fatalf("%d telemetry rows, want 500", len(ticks))
	}
	// Count events, not speed: how many ticks got a fresh command depends
	// on the host, but every timed command is one row's latency.
	fresh, timed := 0, uint64(0)
	for _, row := range ticks {
		if row.Fresh {
			fresh++
		}
		if !math.IsNaN(row.LatencyUS) {
			timed++
		}
		if row.WallS <= 0 {
			t.Fatalf("tick %d has wall time %g", row.Index, row.WallS)
		}
	}
	if timed == 0 || res.Latency.Count != timed {
		t.Fatalf("latency recorded for %d commands, %d rows carry one", res.Latency.Count, timed)
	}
	t.Logf("%s; %d of 500 ticks had a fresh command; latency p50 %.0f µs p99 %.0f µs max %.0f µs; jitter p50 %.0f p99 %.0f max %.0f µs; %d deadline misses",
		res.Realtime, fresh, sum.LatencyUS.P50, sum.LatencyUS.P99, sum.LatencyUS.Max, sum.JitterUS.P50, sum.JitterUS.P99, sum.JitterUS.Max, sum.DeadlineMisses)
}

// In wall-clock mode too, a bad torque is rejected with zero torque, bad
// frames are counted, and an interrupt ends the run with everything
// written and a Stop sent.
func TestWallclockBadInputAndAbort(t *testing.T) {
	m, s, cfg := timedDemo(t, 5)
	cfg.Clock = Wallclock
	cfg.Watchdog = time.Second
	cfg.Severity = map[string]Severity{AlarmBadTorque: SeverityWarn}
	ctx, cancel := context.WithCancelCause(context.Background())
	defer cancel(nil)
	var stop protocol.Stop
	fw := hooked(func(_ bridges.Conn, seq uint32, c *protocol.Command) bool {
		if seq == 300 {
			cancel(errors.New("SIGINT"))
		}
		// Every other answer is a NaN: on a loaded host the rig takes
		// only the newest command at each tick (the rest are stale), so
		// a rare NaN might never be the one taken; with half of them NaN
		// every command the rig takes has even odds.
		c.Torque[0] = 3
		if seq%2 == 1 {
			c.Torque[0] = float32(math.NaN())
		}
		return true
	}, &stop)
	noisy := func(rig bridges.Conn) bridges.Conn { return &frameErrConn{Conn: rig, every: 97} }
	res, dir, err, ferr := runWrapped(t, ctx, cfg, m, s, noisy, fw)
	if err != nil || ferr != nil {
		t.Fatal(err, ferr)
	}
	if res.Summary.Outcome != record.Aborted || stop.Reason != protocol.StopAborted {
		t.Fatalf("outcome %s, stop reason %d", res.Summary.Outcome, stop.Reason)
	}
	if res.Link.BadTorques == 0 || res.Link.BadFrames == 0 {
		t.Fatalf("counts %+v", res.Link)
	}
	run, ticks := readRun(t, dir)
	if int64(len(ticks)) != run.Summary.Ticks {
		t.Fatalf("%d rows, summary %d ticks", len(ticks), run.Summary.Ticks)
	}
	for _, row := range ticks {
		if math.IsNaN(row.Commanded[0]) && (row.Applied[0] != 0 || row.Applied[1] != 0) {
			t.Fatalf("tick %d: NaN commanded, %v applied", row.Index, row.Applied[:2])
		}
	}
	if len(eventsOf(t, dir, "aborted")) != 1 {
		t.Error("the interrupt is not in the event log")
	}
}

// A flood that overfills the mailbox before the loop takes from it: the
// newest command is applied and every other one, the overwritten ones
// included, is counted, so the stale count matches what arrived.
func TestMailboxCountsOverwrittenCommands(t *testing.T) {
	var b mailbox
	const sent = uint32(3*len(b.ring.items)/2 + 7)
	for i := uint32(1); i <= sent; i++ {
		b.put(&heldCommand{seq: i})
	}
	var out heldCommand
	taken, ok := b.takeDue(0, sent, &out)
	if !ok || out.seq != sent {
		t.Fatalf("applied seq %d (ok %v), want the newest, %d", out.seq, ok, sent)
	}
	if taken != int(sent) {
		t.Fatalf("took %d commands, want all %d that arrived", taken, sent)
	}
	b.put(&heldCommand{seq: sent + 1})
	if taken, _ := b.takeDue(0, sent+1, &out); taken != 1 {
		t.Fatalf("next take counted %d, want 1: overwritten commands are reported once", taken)
	}
}

// After a wall-clock e-stop the plant coasts with no firmware: the coast
// rows have no fresh command and so no round-trip latency, not the latency
// of the command that tripped.
func TestWallclockCoastRowsHaveNoLatency(t *testing.T) {
	m, s, cfg := timedDemo(t, 2)
	cfg.Clock = Wallclock
	cfg.Watchdog = time.Second
	cfg.EStopCoast = 0.1
	// The scripted firmware sends no walking torque, so the walker falls
	// 0.5 s into the run (measured with zero torque from this start), and
	// the fall ends the run. The bad torque comes with the fifth answer.
	// In wall-clock the plant does not wait for the firmware: a host that
	// starves it for half a second (it did, on a saturated 2-core host,
	// with four deadline misses) lets the fall come before the bad torque
	// has reached the rig, and such a run cannot show what this test is
	// about. Every answer from the fifth on is bad, since on a loaded host
	// the rig takes only the newest answer at each tick and the fifth
	// itself may be superseded before one takes it. The record says which
	// run the host spoiled, by counting: if the rig took (as the newest at
	// a tick, stale ones not counted) fewer than five answers and none was
	// bad, no bad answer was ever taken, and the host, not the loop, is to
	// blame; the run is spoiled like an invalid one and run again. Once a
	// fifth answer was taken, it was bad and the rig must have tripped on
	// it, and everything below is judged.
	const badSeq = 5
	fw := scripted(func(seq uint32, c *protocol.Command) {
		if seq >= badSeq {
			c.Torque[0] = float32(math.NaN()) // bad_torque trips by default
		}
	})
	type coastRun struct {
		res   Result
		ticks []record.Tick
	}
	r := retrytest.UntilValid(t, "the wall-clock coast run", func(int) (coastRun, record.Summary) {
		res, _, ticks := runAndRead(t, context.Background(), cfg, m, s, fw)
		sum := res.Summary
		if taken := res.Link.Commands; sum.Outcome != record.Invalid && taken < badSeq && sum.Alarms[AlarmBadTorque] == 0 {
			sum.Outcome = record.Invalid
			sum.Reason = fmt.Sprintf("the rig took only %d answers in %d ticks before the run ended %s (alarms %v): the host delayed the firmware past the fall",
				taken, sum.Ticks, res.Summary.Outcome, sum.Alarms)
		}
		return coastRun{res, ticks}, sum
	})
	res, ticks := r.res, r.ticks
	if res.Summary.Outcome != record.Tripped || res.Summary.Alarms[AlarmBadTorque] != 1 {
		t.Fatalf("outcome %s, alarms %v: want a bad_torque trip", res.Summary.Outcome, res.Summary.Alarms)
	}
	trip := -1
	for k := range ticks {
		if math.IsNaN(ticks[k].Commanded[0]) {
			trip = k
			break
		}
	}
	if trip < 0 || !ticks[trip].Fresh || math.IsNaN(ticks[trip].LatencyUS) {
		t.Fatalf("tripping row %d not found with a fresh, timed command", trip)
	}
	coast := ticks[trip+1:]
	if len(coast) < 50 {
		t.Fatalf("%d rows after the trip, want the 0.1 s coast", len(coast))
	}
	for _, row := range coast {
		if row.Fresh || !math.IsNaN(row.LatencyUS) {
			t.Fatalf("coast row %d: fresh %v, latency %g µs; want no command and NaN latency", row.Index, row.Fresh, row.LatencyUS)
		}
	}
}

// A wall-clock latency fault holds every command back; the loop must keep
// them all until they are due, not lose the oldest (the ones due first) to
// the newest. At 2 kHz a 200 ms delay keeps 400 commands in flight, more
// than the mailbox once held.
func TestWallclockLongLatencyKeepsCommands(t *testing.T) {
	const delay = 200 * time.Millisecond
	m, s, cfg := timedDemo(t, 0.35)
	cfg.Clock = Wallclock
	cfg.TickHz = 2000
	cfg.LinkFaults = []LinkFault{{Kind: FaultLatency, Fixed: delay}}
	cfg.Watchdog = 4 * delay // the delay itself is silence the watchdog must allow
	// 150 ms of commands, 300 at 2 kHz, come due before the end. A loop
	// that keeps time takes them in as many ticks; one the host stalled
	// (late ticks, counted) finds many due at once and rightly takes only
	// the newest, the rest counted stale, so a run with late ticks cannot
	// tell kept commands from lost ones by the fresh ticks. Up to three
	// runs are made for one that kept time; if the host stalls every one,
	// the last is held to what it can show (every command that came due
	// was taken or counted stale, none vanished) and the test says so.
	var res Result
	var ticks []record.Tick
	for n := 1; ; n++ {
		res, _, ticks = runAndRead(t, context.Background(), cfg, m, s, referenceFirmware)
		if res.Summary.Outcome == record.Aborted || res.Summary.Alarms[AlarmWatchdog] != 0 {
			t.Fatalf("outcome %s (%s), alarms %v", res.Summary.Outcome, res.Summary.Reason, res.Summary.Alarms)
		}
		if res.Summary.LateTicks == 0 && res.Summary.Outcome != record.Invalid || n == retrytest.MaxAttempts {
			break
		}
		t.Logf("attempt %d: %d late ticks (%s): the host stalled the loop, running it again", n, res.Summary.LateTicks, res.Summary.Outcome)
	}
	fresh := 0
	for _, row := range ticks {
		if row.Fresh {
			fresh++
			if row.WallS < delay.Seconds() {
				t.Fatalf("tick %d took a command %.3f s into the run, before the %v delay", row.Index, row.WallS, delay)
			}
		}
	}
	if res.Summary.LateTicks == 0 && res.Summary.Outcome != record.Invalid {
		if fresh < 100 {
			t.Fatalf("%d ticks had a fresh command (link %+v); the delayed commands were lost", fresh, res.Link)
		}
	} else {
		t.Logf("every attempt had late ticks (%d in the last): judging the counts only", res.Summary.LateTicks)
		if got := res.Link.Commands + res.Link.StaleCommands; got < 100 || fresh == 0 {
			t.Fatalf("%d commands taken or counted stale, %d fresh ticks (link %+v); the delayed commands were lost", got, fresh, res.Link)
		}
	}
	t.Logf("%d of %d ticks had a fresh command; outcome %s; %d late ticks; link %+v", fresh, len(ticks), res.Summary.Outcome, res.Summary.LateTicks, res.Link)
}

// A knee-unlock request in a command that a newer one supersedes in the
// same tick is not lost: the firmware sends it once (protocol section
// 3.4.1), so the applied command carries the bits of every command it
// superseded.
func TestSupersededCommandKeepsItsKneeUnlock(t *testing.T) {
	var b mailbox
	b.put(&heldCommand{seq: 5, cmd: protocol.Command{KneeUnlock: protocol.UnlockKneeLeft}})
	b.put(&heldCommand{seq: 6})
	b.put(&heldCommand{seq: 9}) // a state never sent: garbage, its bits ignored
	b.ring.items[(b.ring.head+2)%len(b.ring.items)].cmd.KneeUnlock = protocol.UnlockKneeRight
	var out heldCommand
	if _, ok := b.takeDue(0, 6, &out); !ok || out.seq != 6 {
		t.Fatalf("applied seq %d (ok %v), want 6", out.seq, ok)
	}
	if out.cmd.KneeUnlock != protocol.UnlockKneeLeft {
		t.Errorf("knee unlock bits %02b, want the left knee's from the superseded command 5 only", out.cmd.KneeUnlock)
	}
}
