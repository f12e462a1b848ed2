package conformance

import (
	"context"
	"fmt"
	"sort"
	"testing"
	"time"

	"gaitrig/bridges/protocol"
)

// pacedBaud is slow enough that the wire time (12.5 ms a tick) dwarfs what
// the scheduler adds on a busy machine, fast enough to keep the test short.
const pacedBaud = 115200

// A pty paced at a baud rate delivers a state and its command no sooner
// than a UART at that rate would: every measured round trip is at least the
// computed wire time (protocol.SerialBudget). That bound is strict because
// pacing only ever delays a frame, and a busy machine only adds delay.
// The other side cannot be bounded tightly on a shared 2-core machine (a
// stalled process makes any one sample late), so it is checked on the
// median of many samples and loosely: the median must be below twice the
// wire time, which a pty that ignored the pacing (a round trip of tens of
// microseconds) or paced twice over would both miss by far.
func TestPacedPtyRoundTripMatchesWireTime(t *testing.T) {
	dial, err := LinkDialer(fmt.Sprintf("pty@%d", pacedBaud), "paced-test")
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	rt, err := MeasureRoundTrips(ctx, dial, 60)
	if err != nil {
		t.Fatal(err)
	}
	wire := protocol.SerialBudget(pacedBaud, 0, 0).Wire
	if len(rt.Samples) != 60 || rt.Unanswered != 0 {
		t.Fatalf("%d round trips measured, %d unanswered; want 60 and 0", len(rt.Samples), rt.Unanswered)
	}
	s := append([]time.Duration(nil), rt.Samples...)
	sort.Slice(s, func(i, j int) bool { return s[i] < s[j] })
	if s[0] < wire {
		t.Errorf("fastest round trip %v is below the wire time %v at %d baud: the pacing lets bytes arrive early", s[0], wire, pacedBaud)
	}
	if med := s[len(s)/2]; med > 2*wire {
		t.Errorf("median round trip %v is above twice the wire time %v", med, wire)
	}
	t.Logf("at %d baud: wire time %v; measured min %v, median %v, max %v", pacedBaud, wire, s[0], s[len(s)/2], s[len(s)-1])
}

// Without a baud rate the pty is not paced: the same measurement comes in
// far below the wire time of even the fastest standard rate, so the paced
// test above shows the pacing and not the pty itself.
func TestUnpacedPtyIsNotPaced(t *testing.T) {
	dial, err := LinkDialer("pty", "unpaced-test")
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
	defer cancel()
	rt, err := MeasureRoundTrips(ctx, dial, 60)
	if err != nil {
		t.Fatal(err)
	}
	s := append([]time.Duration(nil), rt.Samples...)
	sort.Slice(s, func(i, j int) bool { return s[i] < s[j] })
	if wire := protocol.SerialBudget(pacedBaud, 0, 0).Wire; s[0] >= wire {
		t.Errorf("fastest unpaced round trip %v is at least the %d-baud wire time %v", s[0], pacedBaud, wire)
	}
}
