package conformance

import (
	"context"
	"errors"
	"fmt"
	"math"
	"sort"
	"strings"
	"sync"
	"testing"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/bridges/serial"
	"gaitrig/firmware/reference"
	"gaitrig/hil"
	"gaitrig/internal/hostload"
)

// testSamples keeps the battery short in tests; the round-trip figure is
// checked for what it is computed from, not for its size.
const testSamples = 200

// runOver runs the battery over a link in --link syntax.
func runOver(t *testing.T, link string) Report {
	t.Helper()
	dial, err := LinkDialer(link, "conformance-test")
	if err != nil {
		t.Fatal(err)
	}
	rep, _ := runUntilJudged(t, link, dial)
	return rep
}

// The Go reference firmware passes every check over the in-process link,
// a real pty pair and the embedded broker. Over the in-process link no
// damaged frame can be sent (it carries decoded messages): those two checks
// must say so, and only those.
func TestReferenceFirmwarePasses(t *testing.T) {
	for _, link := range []string{"builtin", "pty", "embedded"} {
		t.Run(link, func(t *testing.T) {
			rep := runOver(t, link)
			if !rep.Passed || len(rep.Failed()) > 0 {
				t.Fatalf("verdict %v, failed %v", rep.Passed, rep.Failed())
			}
			if len(rep.Checks) != len(Checks) {
				t.Fatalf("%d results for %d checks", len(rep.Checks), len(Checks))
			}
			for i, c := range rep.Checks {
				if c.Name != Checks[i].Name {
					t.Errorf("result %d is %s, the battery's check %d is %s", i, c.Name, i, Checks[i].Name)
				}
				want := Pass
				if link == "builtin" && (c.Name == CheckBadCRC || c.Name == CheckUnknownType) {
					want = Skipped
				}
				if c.Status != want {
					t.Errorf("%s: %s (%s), want %s", c.Name, c.Status, c.Seen, want)
				}
			}
			if rep.Greeting == nil || rep.Greeting.Name != "gaitrig-reference" {
				t.Errorf("greeting %+v, want the reference firmware's", rep.Greeting)
			}
			checkPercentiles(t, rep)
		})
	}
}

// checkPercentiles recomputes the round-trip figures from the raw samples
// by sorting them (nearest rank: the smallest sample with at least a
// fraction q of the samples at or below it), independently of the
// histogram the report uses, and compares them. The histogram reports the
// upper edge of the sample's 1 µs bin, capped at the maximum, so the
// sorted value is rounded the same way.
func checkPercentiles(t *testing.T, rep Report) {
	t.Helper()
	s := append([]time.Duration(nil), rep.Samples...)
	if len(s) != testSamples || rep.RoundTrip.Count != uint64(len(s)) {
		t.Fatalf("%d raw samples, summary counts %d, asked for %d", len(s), rep.RoundTrip.Count, testSamples)
	}
	sort.Slice(s, func(i, j int) bool { return s[i] < s[j] })
	mx := s[len(s)-1]
	us := func(d time.Duration) float64 { return float64(d) / float64(time.Microsecond) }
	// The value at the quantile's rank ⌊q·n + ½⌋ (at least 1) of the
	// sorted samples; the histogram may report it up to
	// hil.HistogramPrecision above (plus 1 ns), never below, never above
	// the max (hil.Histogram.Quantile's contract).
	within := func(q, got float64) bool {
		r := max(1, int(math.Floor(q*float64(len(s))+0.5)))
		v := s[r-1]
		hi := min(float64(v)*(1+hil.HistogramPrecision)+1, float64(mx))
		return got >= us(v) && got <= hi/float64(time.Microsecond)
	}
	if !within(0.5, rep.RoundTrip.P50) || !within(0.99, rep.RoundTrip.P99) || rep.RoundTrip.Max != us(mx) {
		t.Errorf("round trip p50 %v p99 %v max %v µs; the sorted samples give %v, %v, %v",
			rep.RoundTrip.P50, rep.RoundTrip.P99, rep.RoundTrip.Max,
			us(s[max(1, int(math.Floor(0.5*float64(len(s))+0.5)))-1]), us(s[max(1, int(math.Floor(0.99*float64(len(s))+0.5)))-1]), us(mx))
	}
}

// Each broken firmware has one fault and must fail exactly the check that
// looks for it; the faultless board must pass everything. The board runs
// on the leader of a real pty pair and stays up across the battery's
// restarts, as a powered board on a serial port does.
func TestBrokenFirmwareFailsTheRightCheck(t *testing.T) {
	cases := []struct {
		fault fault
		want  string // the one check that must fail; "" for none
	}{
		{faultNone, ""},
		{faultGreetingSeq, CheckGreeting},
		{faultSkipFirstState, CheckConfig},
		{faultDuplicateConfigDropsState, CheckDuplicate},
		{faultWrongSeq, CheckEveryState},
		{faultResentTwice, CheckResent},
		{faultResentIgnored, CheckResent},
		{faultAcceptsBadCRC, CheckBadCRC},
		{faultUnknownTypeDropsState, CheckUnknownType},
		{faultHeartbeatDropsState, CheckHeartbeat},
		{faultBeltPlaceRefused, CheckBeltPlace},
		{faultUndefinedStatusBit, CheckStatusBits},
		{faultUndefinedUnlockBit, CheckStatusBits},
		{faultAnswersAfterStop, CheckStopsOnStop},
		{faultNoGreetingAfterStop, CheckGreetsAgain},
		{faultWrongRefusalReason, CheckRefusesBadConf},
		{faultTakesBadConfig, CheckRefusesBadConf},
		{faultStopsOnDuplicateConfig, CheckDuplicate}, // the checks after it are not run, not failed
	}
	for _, c := range cases {
		t.Run(c.fault.String(), func(t *testing.T) {
			dial := startBoard(t, c.fault)
			ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
			defer cancel()
			rep, err := Run(ctx, "test board", dial, Options{Samples: 50, host: hostload.Quiet()}) // a dropped state on a quiet host: the verdict must not depend on this host's load
			if err != nil {
				t.Fatal(err)
			}
			failed := rep.Failed()
			var want []string
			if c.want != "" {
				want = []string{c.want}
			}
			if strings.Join(failed, ",") != strings.Join(want, ",") {
				for _, r := range rep.Checks {
					t.Logf("%-22s %-7s %s", r.Name, r.Status, r.Seen)
				}
				t.Fatalf("failed checks %v, want exactly %v", failed, want)
			}
			wantPass := c.want == ""
			if c.want == CheckGreetsAgain {
				// An optional check, but the refusal check after it could
				// not run: no passing verdict.
				if r, _ := rep.Result(CheckRefusesBadConf); r.Status != NotRun {
					t.Errorf("refusal check after no greeting: %s, want %s", r.Status, NotRun)
				}
			}
			if rep.Passed != wantPass {
				t.Errorf("verdict %v, want %v", rep.Passed, wantPass)
			}
		})
	}
}

// The unknown-type frame is well formed apart from its type: the decoder
// refuses it for the type, not for its CRC or length.
func TestUnknownTypeFrame(t *testing.T) {
	var m protocol.Message
	err := protocol.Decode(unknownTypeFrame(protocol.Version, 7), &m)
	if !errors.Is(err, protocol.ErrUnknownType) {
		t.Fatalf("decoding the unknown-type frame: %v, want an unknown-type refusal", err)
	}
}

// The reference firmware as a board on the leader of a real pty pair, one
// Serve for the whole battery (Options.GreetAgain, as `gaitrig firmware`
// runs it): the battery opens the follower path anew for each session, so
// the second greeting comes from the same firmware after its stop. Run for
// a firmware of protocol version 1 and of the current version: the battery
// must speak the version the firmware greeted with, and every check must
// pass in both.
func TestReferenceFirmwareGreetsAgainOverPty(t *testing.T) {
	for _, v := range []uint8{1, protocol.Version} {
		t.Run(fmt.Sprintf("v%d", v), func(t *testing.T) {
			p, err := serial.NewPty()
			if err != nil {
				t.Fatal(err)
			}
			fwConn := serial.NewConn(p.Master, "pty leader", serial.Config{})
			var mu sync.Mutex
			var sessions []error
			ctx, cancel := context.WithCancel(context.Background())
			served := make(chan error, 1)
			go func() {
				served <- reference.ServeContext(ctx, fwConn, reference.Options{Protocol: v, GreetAgain: true, IdleTimeout: 30 * time.Second,
					SessionEnded: func(err error) { mu.Lock(); sessions = append(sessions, err); mu.Unlock() }})
			}()
			defer func() {
				cancel()
				select {
				case err := <-served:
					if err != nil {
						t.Errorf("the firmware ended with %v, want nil when its context ends", err)
					}
				case <-time.After(5 * time.Second):
					t.Error("the firmware did not end within 5 s of its context")
				}
				fwConn.Close()
				p.Close()
			}()
			dials := 0
			dial := func() (bridges.Conn, func(), error) {
				c, err := serial.Open(serial.Config{Port: p.Path})
				if err != nil {
					return nil, nil, err
				}
				dials++
				return c, func() { c.Close() }, nil
			}
			rctx, rcancel := context.WithTimeout(context.Background(), 2*time.Minute)
			defer rcancel()
			rep, err := Run(rctx, fmt.Sprintf("pty (reference v%d)", v), dial, Options{Samples: testSamples, Log: func(l string) { t.Log(l) }})
			if err != nil {
				t.Fatal(err)
			}
			for _, c := range rep.Checks {
				if c.Status != Pass {
					t.Errorf("%s: %s (%s), want pass", c.Name, c.Status, c.Seen)
				}
			}
			if !rep.Passed || rep.Greeting == nil || rep.Greeting.Version != v {
				t.Errorf("verdict %v, greeting %+v: want a pass with version %d", rep.Passed, rep.Greeting, v)
			}
			if dials != 2 {
				t.Errorf("%d dials, want 2", dials)
			}
			mu.Lock()
			defer mu.Unlock()
			if len(sessions) != 2 || sessions[0] != nil || sessions[1] == nil {
				t.Errorf("sessions ended with %v; want a normal end, then the refusal", sessions)
			}
		})
	}
}

// A link that cannot be opened again at once (the embedded broker still
// holding the closed client's id) is dialled again within the handshake
// time: two refused dials, then the board greets and every check passes,
// the attempts named. A link that never opens again fails the greeting
// check with the dial's error and leaves the refusal check not run.
func TestSecondSessionRedials(t *testing.T) {
	for _, tc := range []struct {
		name    string
		refused int // dials refused after the first session
		want    Status
	}{{"opens at the third attempt", 2, Pass}, {"never opens", math.MaxInt, Fail}} {
		t.Run(tc.name, func(t *testing.T) {
			board := startBoard(t, faultNone)
			dials, refused := 0, 0
			dial := func() (bridges.Conn, func(), error) {
				dials++
				if dials > 1 && refused < tc.refused {
					refused++
					return nil, nil, errors.New("client id still in use")
				}
				return board()
			}
			ctx, cancel := context.WithTimeout(context.Background(), time.Minute)
			defer cancel()
			rep, err := Run(ctx, "test board", dial, Options{Samples: 20})
			if err != nil {
				t.Fatal(err)
			}
			r, _ := rep.Result(CheckGreetsAgain)
			if r.Status != tc.want {
				t.Fatalf("%s: %s (%s), want %s", r.Name, r.Status, r.Seen, tc.want)
			}
			switch tc.want {
			case Pass:
				if !strings.Contains(r.Seen, "attempt 3") || !rep.Passed {
					t.Errorf("seen %q, verdict %v: want a pass at attempt 3", r.Seen, rep.Passed)
				}
			case Fail:
				if !strings.Contains(r.Seen, "client id still in use") {
					t.Errorf("seen %q: want the dial's error", r.Seen)
				}
				if rr, _ := rep.Result(CheckRefusesBadConf); rr.Status != NotRun {
					t.Errorf("refusal check %s, want %s", rr.Status, NotRun)
				}
			}
		})
	}
}
