package rig

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"time"

	"gaitrig/bridges/protocol"
	"gaitrig/hil"
	"gaitrig/scenarios"
)

// WireBudget is what CheckWireBudget found for a run over a serial line.
type WireBudget struct {
	// Budget is the computed budget (protocol.SerialBudget) at the link's
	// baud rate and the run's tick rate; the board's compute time is not
	// known to the rig and counts as 0.
	Budget protocol.WireBudget
	// Clock is the run's clock mode.
	Clock hil.ClockMode
	// Message says what does not fit and what would, in words; "" when the
	// budget fits.
	Message string
	// Refuse is true when a run must not start without being forced: a
	// wall-clock run whose state and command alone take longer than a tick.
	Refuse bool
}

// CheckWireBudget computes the wire-time budget of a run of sc over link
// (in --link syntax; "" for the scenario's own link) at the run's tick rate
// (tickHz > 0 overrides the scenario's, clock likewise). Links without a
// baud rate (in-process, MQTT, an unpaced pty) have no budget: ok is false;
// so has a serial port whose baud rate means nothing (a pseudo-terminal, a
// USB virtual serial port: see BaudIgnored).
// A wall-clock run that does not fit is to be refused unless forced; a
// lockstep run only takes longer in real time than it simulates, so it
// gets the warning alone.
func CheckWireBudget(sc *scenarios.Scenario, link string, tickHz float64, clock hil.ClockMode) (wb WireBudget, ok bool, err error) {
	cfg, err := FromScenario(sc)
	if err != nil {
		return WireBudget{}, false, ConfigError(err)
	}
	if tickHz > 0 {
		cfg.TickHz = tickHz
	}
	if clock != "" {
		cfg.Clock = clock
	}
	if cfg, err = cfg.WithDefaults(); err != nil {
		return WireBudget{}, false, ConfigError(err)
	}
	var l Link
	if link != "" {
		l, err = ParseLink(link)
	} else {
		l, err = ScenarioLink(sc)
	}
	if err != nil {
		return WireBudget{}, false, err
	}
	if l.Baud <= 0 || (l.Kind != "serial" && l.Kind != "pty") {
		return WireBudget{}, false, nil
	}
	if l.Kind == "serial" {
		if _, ignored := BaudIgnored(l.Addr); ignored {
			return WireBudget{}, false, nil
		}
	}
	b := protocol.SerialBudget(l.Baud, cfg.TickHz, 0)
	wb = WireBudget{Budget: b, Clock: cfg.Clock}
	if b.Fits() {
		return wb, true, nil
	}
	ms := func(d time.Duration) string { return fmt.Sprintf("%.3g ms", float64(d)/float64(time.Millisecond)) }
	wb.Message = fmt.Sprintf("%s: a state and a command take %s on the wire at %d baud (%d + %d bytes, 10 bits each), longer than the %s tick at %g Hz; %d baud carries at most %d Hz",
		l.String(), ms(b.Wire), l.Baud, b.StateBytes, b.CommandBytes, ms(b.Period), cfg.TickHz, l.Baud, protocol.MaxTickHz(l.Baud, 0))
	if r, ok := protocol.LowestBaud(cfg.TickHz, 0); ok {
		wb.Message += fmt.Sprintf(", and the lowest standard baud rate that carries %g Hz is %d", cfg.TickHz, r)
	} else {
		wb.Message += fmt.Sprintf(", and no standard baud rate carries %g Hz", cfg.TickHz)
	}
	if cfg.Clock == hil.Wallclock {
		wb.Refuse = true
		wb.Message += " (a wall-clock run would miss its deadlines: refused unless forced)"
	} else {
		wb.Message += " (lockstep: the run takes that much longer in real time)"
	}
	return wb, true, nil
}

// BaudIgnored reports whether the serial port at path ignores its baud
// rate, and why: a pseudo-terminal (/dev/pts/N) moves bytes at memory
// speed, and a USB virtual serial port (USB CDC ACM: /dev/ttyACM*, or a
// port whose Linux driver is cdc_acm) moves them in USB packets at the bus
// speed. The wire-time budget of a UART does not apply to either. A port
// behind a USB-to-UART bridge (/dev/ttyUSB*) or a board's own UART does
// have a real line at the configured rate.
func BaudIgnored(path string) (why string, ignored bool) {
	dev := path
	if p, err := filepath.EvalSymlinks(path); err == nil {
		dev = p // /dev/serial/by-id/… names the device it links to
	}
	base := filepath.Base(dev)
	switch {
	case strings.HasPrefix(dev, "/dev/pts/"):
		return dev + " is a pseudo-terminal", true
	case strings.HasPrefix(base, "ttyACM"):
		return dev + " is a USB virtual serial port (CDC ACM)", true
	}
	if drv, err := os.Readlink(filepath.Join("/sys/class/tty", base, "device", "driver")); err == nil && filepath.Base(drv) == "cdc_acm" {
		return dev + " is a USB virtual serial port (driver cdc_acm)", true
	}
	return "", false
}
