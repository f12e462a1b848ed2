package conformance

import (
	"context"
	"fmt"
	"time"

	"gaitrig/bridges/protocol"
	"gaitrig/hil"
	"gaitrig/internal/hostload"
)

// RoundTrips is a round-trip measurement with the plant frozen.
type RoundTrips struct {
	// Greeting is what the firmware announced.
	Greeting protocol.Greeting
	// Summary is the distribution in µs (hil.Histogram: percentiles to the
	// microsecond, rounded up).
	Summary hil.Summary
	// Samples are the raw round trips, in the order measured.
	Samples []time.Duration
	// Unanswered counts states that got no right answer within the
	// watchdog (they are not in Samples).
	Unanswered int
	// HostStalled is 1 when the measurement ended early at a state left
	// unanswered while the host's CPUs stayed contended to the limit
	// (hostload): the firmware may not have been run, so it is counted
	// apart from Unanswered and not in Samples. 0 otherwise.
	HostStalled int
}

// MeasureRoundTrips greets the firmware dial reaches, configures it as the
// battery does and sends n states with frozen readings one after the
// other, each as soon as the previous one was answered, timing each from
// Send to its command's arrival; then it stops the firmware (reason end).
// It measures the link and the board together, never the plant: a bench
// uses it to see what its own board and wiring cost per tick. An error
// means there was nothing to measure (no link, no greeting, a link that
// closed).
func MeasureRoundTrips(ctx context.Context, dial Dialer, n int) (RoundTrips, error) {
	host := hostload.Open()
	defer host.Close()
	return measureRoundTrips(ctx, dial, n, Watchdog, host)
}

// measureRoundTrips is MeasureRoundTrips judging answers by the watchdog wd
// on the host whose CPU pressure host reads (tests plant both).
func measureRoundTrips(ctx context.Context, dial Dialer, n int, wd time.Duration, host *hostload.Pressure) (RoundTrips, error) {
	conn, closeLink, err := dial()
	if err != nil {
		return RoundTrips{}, err
	}
	defer closeLink()
	s := newSession(conn, wd, host)
	g, _, err := s.awaitGreeting(ctx, GreetingTimeout)
	if err != nil {
		return RoundTrips{}, err
	}
	if g.Actuators < 1 || g.Actuators > protocol.MaxJoints {
		return RoundTrips{}, fmt.Errorf("the firmware announced %d actuators; want 1–%d", g.Actuators, protocol.MaxJoints)
	}
	s.configure(int(g.Actuators))
	if err := s.sendConfig(&s.config); err != nil {
		return RoundTrips{}, fmt.Errorf("sending the config: %w", err)
	}
	out := RoundTrips{Greeting: g, Samples: make([]time.Duration, 0, n)}
	var h hil.Histogram
	for i := 0; i < n && ctx.Err() == nil; i++ {
		a := s.exchange(ctx, s.nextState())
		if a.gone {
			return out, fmt.Errorf("after %d round trips: %s", len(out.Samples), a.why)
		}
		if a.hostStalled {
			// Its late answer would come in the next state's wait: stop
			// here, as the battery does.
			out.HostStalled++
			break
		}
		if a.problem(s) != "" {
			out.Unanswered++
			continue
		}
		h.Add(a.rtt)
		out.Samples = append(out.Samples, a.rtt)
	}
	out.Summary = h.Summarize()
	st := protocol.Message{Version: s.version, Type: protocol.TypeStop, Seq: s.seq, Stop: protocol.Stop{Reason: protocol.StopEnd, Text: "round trips measured"}}
	before := conn.Stats().FramesSent
	if conn.Send(&st) == nil {
		// A serial link writes from its own goroutine, and closing it drops
		// what is still queued: wait (bounded) until the stop is written,
		// so the firmware learns the session is over.
		for end := time.Now().Add(time.Second); conn.Stats().FramesSent == before && time.Now().Before(end); {
			time.Sleep(time.Millisecond)
		}
	}
	return out, ctx.Err()
}
