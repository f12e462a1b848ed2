package rig

import (
	"context"
	"errors"
	"strings"
	"testing"
	"time"

	"gaitrig/hil"
	"gaitrig/scenarios"
)

// The wire-time check of a run: which links have a budget, what the
// message names, and that a wall-clock run is refused unless forced while
// a lockstep run only gets the warning. The numbers come from
// protocol.SerialBudget, checked against a hand computation in its own
// test; here 1440 bits a tick: 115 200 baud carries 80 Hz, 921 600 baud
// 640 Hz, and 2 000 000 baud is the lowest standard rate for 1 kHz.
func TestCheckWireBudget(t *testing.T) {
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		link     string
		hz       float64
		clock    hil.ClockMode
		ok       bool
		refuse   bool
		mentions []string
	}{
		{"builtin", 1000, hil.Wallclock, false, false, nil},
		{"pty", 1000, hil.Wallclock, false, false, nil},
		{"serial:/dev/pts/9@115200", 1000, hil.Wallclock, false, false, nil},   // a pty ignores the rate
		{"serial:/dev/ttyACM3@115200", 1000, hil.Wallclock, false, false, nil}, // so does USB CDC
		{"pty@2000000", 1000, hil.Wallclock, true, false, nil},
		{"pty@921600", 500, hil.Wallclock, true, false, nil},
		{"pty@115200", 1000, hil.Lockstep, true, false, []string{"12.5 ms", "carries at most 80 Hz", "lowest standard baud rate that carries 1000 Hz is 2000000", "lockstep"}},
		{"serial:/dev/ttyUSB9@921600", 1000, hil.Wallclock, true, true, []string{"1.56 ms", "at most 640 Hz", "2000000", "refused unless forced"}},
		{"pty@115200", 5000, hil.Wallclock, true, true, []string{"no standard baud rate carries 5000 Hz"}},
	}
	for _, c := range cases {
		wb, ok, err := CheckWireBudget(sc, c.link, c.hz, c.clock)
		if err != nil {
			t.Errorf("%s: %v", c.link, err)
			continue
		}
		if ok != c.ok || wb.Refuse != c.refuse || (wb.Message != "") != (len(c.mentions) > 0) {
			t.Errorf("%s at %g Hz %s: ok %v refuse %v message %q; want ok %v refuse %v, message %v", c.link, c.hz, c.clock, ok, wb.Refuse, wb.Message, c.ok, c.refuse, len(c.mentions) > 0)
		}
		for _, m := range c.mentions {
			if !strings.Contains(wb.Message, m) {
				t.Errorf("%s at %g Hz: message %q lacks %q", c.link, c.hz, wb.Message, m)
			}
		}
	}

	// Prepare refuses the wall-clock run that does not fit, as a
	// configuration error, and starts it when forced (the warning goes to
	// the log).
	o := Options{Link: "pty@115200", Clock: hil.Wallclock, NoRecord: true}
	if p, err := Prepare(context.Background(), sc, o); err == nil || !errors.Is(err, ErrConfig) || !strings.Contains(err.Error(), "--force") {
		if p != nil {
			p.Close()
		}
		t.Fatalf("a wall-clock run at 1 kHz over pty@115200: %v, want a configuration error asking for --force", err)
	}
	var logged []string
	o.Force = true
	o.Log = func(l string) { logged = append(logged, l) }
	p, err := Prepare(context.Background(), sc, o)
	if err != nil {
		t.Fatalf("forced: %v", err)
	}
	defer p.Close()
	if !strings.Contains(strings.Join(logged, "\n"), "warning: pty@115200") {
		t.Errorf("forced run logged %q, want the warning", logged)
	}
	// 1440 bits at 115 200 baud are 12.5 ms: the resend interval is raised
	// to 25 ms, so the rig does not resend a state its answer cannot yet
	// have crossed the line for.
	if p.Config.Resend != 25*time.Millisecond {
		t.Errorf("resend interval %v over pty@115200, want 25ms", p.Config.Resend)
	}
}
