package hil

import (
	"context"
	"fmt"
	"strings"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/internal/retrytest"
	"gaitrig/record"
)

// Refusals reported while a run goes on become broker_refusal warnings in
// the record, counted exactly even when the bounded queue overflowed, with
// a summary line per kind at the end.
func TestNoticesBecomeBrokerRefusalAlarms(t *testing.T) {
	cfg, run := shortRun(t, 200)
	q := NewNotices(4)
	cfg.Notices = q
	queued := 0
	for i := 0; i < 10; i++ {
		kind := "client_id"
		if i%5 == 4 {
			kind = "publish"
		}
		if q.Post(Notice{Kind: kind, Message: fmt.Sprintf("client id %q: not one of ours", fmt.Sprint("board", i))}) {
			queued++
		}
	}
	if queued != 4 {
		t.Fatalf("%d notices queued, want the queue's 4 (Post must not block or grow)", queued)
	}
	res, _, dir := run(cfg, referenceFirmware)
	if res.Summary.Outcome != record.Pass {
		t.Fatalf("outcome %s (%s): refusals are warnings", res.Summary.Outcome, res.Summary.Reason)
	}
	if n := res.Summary.Alarms[AlarmBrokerRefusal]; n != 10 {
		t.Fatalf("broker_refusal counted %d, want all 10 posted", n)
	}
	ev := eventsOf(t, dir, AlarmBrokerRefusal)
	if len(ev) == 0 || ev[0].Severity != record.Warn || !strings.Contains(ev[0].Message, "client_id") {
		t.Fatalf("broker_refusal events %+v", ev)
	}
	notQueued := 0.0
	for _, e := range ev {
		notQueued += e.Values["not_queued"]
	}
	if notQueued != 6 {
		t.Fatalf("events report %g refusals that did not fit the queue, want 6", notQueued)
	}
	sum := eventsOf(t, dir, "broker_refusal_summary")
	if len(sum) != 1 || sum[0].Values["client_id"] != 8 || sum[0].Values["publish"] != 2 {
		t.Fatalf("summary events %+v: want client_id 8, publish 2", sum)
	}
}

// A handshake that times out while the broker refused connections says so:
// the board with the wrong client id is told why, not asked whether it is
// powered; the refusals are in the record too.
func TestNoGreetingErrorNamesRefusals(t *testing.T) {
	silent := func(c bridges.Conn) error { _, err := untilStop(c, nil); return err }
	for _, refused := range []int{0, 2} {
		t.Run(fmt.Sprint(refused, " refusals"), func(t *testing.T) {
			m, s, cfg := demo(t, 5)
			cfg.HandshakeTimeout = 300 * time.Millisecond
			cfg.Notices = NewNotices(0)
			for i := 0; i < refused; i++ {
				cfg.Notices.Post(Notice{Kind: "client_id", Message: `client id "board-7" from 127.0.0.1:5000: not one of ours`})
			}
			_, dir, err, _ := runWith(t, context.Background(), cfg, m, s, silent)
			if err == nil || !strings.Contains(err.Error(), "no greeting") {
				t.Fatalf("error %v, want no greeting", err)
			}
			mentions := strings.Contains(err.Error(), "refused") && strings.Contains(err.Error(), "client_id: 2") && strings.Contains(err.Error(), "board-7")
			if mentions != (refused > 0) {
				t.Fatalf("error %q: mentions refusals %v, want %v", err, mentions, refused > 0)
			}
			if n := len(eventsOf(t, dir, AlarmBrokerRefusal)); (n > 0) != (refused > 0) {
				t.Fatalf("%d broker_refusal events for %d refusals", n, refused)
			}
		})
	}
}

// scriptedErrConn returns the given frame errors from its Recvs after the
// first skip, then reads the link again. Only one goroutine calls Recv at a
// time (the handshake, then the lockstep loop or the wall-clock receiver).
type scriptedErrConn struct {
	bridges.Conn
	skip int
	errs []string
}

func (c *scriptedErrConn) Recv(d time.Time, m *protocol.Message) error {
	if c.skip > 0 {
		c.skip--
		return c.Conn.Recv(d, m)
	}
	if len(c.errs) > 0 {
		r := c.errs[0]
		c.errs = c.errs[1:]
		return &bridges.FrameError{Reason: r}
	}
	return c.Conn.Recv(d, m)
}

// A burst of one kind of bad frame does not hide another kind inside the
// rate limit: every frame is counted, the first of each kind is logged, and
// the end of the run counts every kind. In both clocks, and in the
// handshake as well as mid-run.
func TestBadFrameEveryKindReachesTheRecord(t *testing.T) {
	for _, clock := range []ClockMode{Lockstep, Wallclock} {
		for _, skip := range []int{0, 50} {
			t.Run(fmt.Sprint(clock, "/after ", skip, " reads"), func(t *testing.T) {
				m, s, cfg := timedDemo(t, 0.5)
				cfg.Clock = clock
				var errs []string
				for i := 0; i < 20; i++ {
					errs = append(errs, fmt.Sprintf("frame too long: %d bytes without a zero delimiter, the limit is 515; skipping to the next delimiter", 600+i))
				}
				errs = append(errs, "unknown message type 0x55")
				// A wall-clock run ends on time: a saturated host may give
				// its receiver fewer reads than the script needs before the
				// end. Counting says so (errors left undelivered), and such
				// a run is spoiled like an invalid one and run again.
				type scriptedRun struct {
					res Result
					dir string
				}
				r := retrytest.UntilValid(t, "the scripted bad frames", func(int) (scriptedRun, record.Summary) {
					sc := &scriptedErrConn{Conn: nil, skip: skip, errs: errs}
					wrap := func(rig bridges.Conn) bridges.Conn { sc.Conn = rig; return sc }
					res, dir, err, _ := runWrapped(t, context.Background(), cfg, m, s, wrap, referenceFirmware)
					if err != nil {
						t.Fatal(err)
					}
					sum := res.Summary
					if left := len(sc.errs); left > 0 && sum.Outcome != record.Invalid {
						sum.Outcome = record.Invalid
						sum.Reason = fmt.Sprintf("the run ended (%s) with %d of the 21 scripted bad frames not yet read: the host gave the loop too few reads", res.Summary.Outcome, left)
					}
					return scriptedRun{res, dir}, sum
				})
				res, dir := r.res, r.dir
				if res.Link.BadFrames != 21 || res.Summary.Alarms[AlarmBadFrame] != 21 {
					t.Fatalf("%d bad frames, %d alarms: want 21", res.Link.BadFrames, res.Summary.Alarms[AlarmBadFrame])
				}
				logged := eventsOf(t, dir, AlarmBadFrame)
				var sawTooLong, sawUnknown bool
				for _, e := range logged {
					sawTooLong = sawTooLong || strings.Contains(e.Message, "frame too long")
					sawUnknown = sawUnknown || strings.Contains(e.Message, "unknown message type 0x55")
				}
				if !sawTooLong || !sawUnknown || len(logged) >= 21 {
					t.Fatalf("%d bad_frame lines (too long %v, unknown type %v): want each kind, rate-limited", len(logged), sawTooLong, sawUnknown)
				}
				sum := eventsOf(t, dir, "bad_frame_summary")
				if len(sum) != 1 || sum[0].Values["frame too long"] != 20 || sum[0].Values["unknown message type"] != 1 {
					t.Fatalf("summary %+v: want frame too long 20, unknown message type 1", sum)
				}
			})
		}
	}
}

// The kinds table is bounded: ever new reasons end up under "other".
func TestFrameKindTableIsBounded(t *testing.T) {
	var h linkHealth
	for i := 0; i < 100; i++ {
		h.noteFrameKind(fmt.Sprintf("kind%c", 'A'+rune(i%60)))
	}
	if len(h.frameKinds) > maxFrameKinds+1 {
		t.Fatalf("%d kinds kept, at most %d", len(h.frameKinds), maxFrameKinds+1)
	}
	if frameKind("bad CRC: got 0x1234, computed 0xBEEF") != "bad CRC" || frameKind("unknown message type 0x55") != "unknown message type" || frameKind("") != "other" {
		t.Fatal("frameKind does not name the kinds")
	}
}

// Looking at an empty notice queue, which every tick does, allocates
// nothing: the tick loop stays allocation-free with notices wired.
func TestDrainingNoNoticesDoesNotAllocate(t *testing.T) {
	m, s, cfg := demo(t, 1)
	cfg.Notices = NewNotices(0)
	rigEnd, fwEnd := inprocPair()
	defer rigEnd.Close()
	defer fwEnd.Close()
	r, err := newRunner(cfg, m, s, rigEnd, nil)
	if err != nil {
		t.Fatal(err)
	}
	if a := testing.AllocsPerRun(1000, r.drainNotices); a != 0 {
		t.Fatalf("%g allocations per look at an empty notice queue", a)
	}
}
