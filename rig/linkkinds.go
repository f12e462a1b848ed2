package rig

import (
	"fmt"
	"strconv"
	"strings"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/broker"
	"gaitrig/bridges/inproc"
	"gaitrig/bridges/mqtt"
	"gaitrig/bridges/serial"
	"gaitrig/firmware/reference"
	"gaitrig/hil"
	"gaitrig/scenarios"
)

// The built-in link kinds, in the order --link tries them (embedded before
// mqtt, so "mqtt:embedded" is the embedded broker).
func init() {
	RegisterLinkKind(LinkKind{
		Name: "builtin", Syntax: "builtin", Help: "reference firmware in-process", InProcess: true,
		Parse: exactly("builtin"),
		FromScenario: func(c *scenarios.Controller) (Link, bool) {
			return Link{Kind: "builtin"}, c.Link == scenarios.LinkBuiltin || c.Link == scenarios.LinkNone
		},
		Dial: dialBuiltin,
	})
	RegisterLinkKind(LinkKind{
		Name: "embedded", Syntax: "embedded", Help: "reference firmware over the embedded MQTT broker",
		Parse: exactly("embedded", "mqtt:embedded"),
		FromScenario: func(c *scenarios.Controller) (Link, bool) {
			return Link{Kind: "embedded"}, c.Link == scenarios.LinkMQTT && (c.Broker == "" || c.Broker == "embedded")
		},
		Dial: dialEmbedded,
	})
	RegisterLinkKind(LinkKind{
		Name: "pty", Syntax: "pty[@BAUD]", Help: "reference firmware over a real pseudo-terminal pair, COBS frames as on a board; @BAUD holds each frame for its wire time at BAUD, as a UART would",
		Parse: parsePty,
		Format: func(l Link) string {
			if l.Baud > 0 {
				return fmt.Sprintf("pty@%d", l.Baud)
			}
			return "pty"
		},
		Dial:        dialPty,
		FirmwareEnd: firmwareOnPty,
	})
	RegisterLinkKind(LinkKind{
		Name: "serial", Syntax: "serial:PORT[@BAUD]", Help: "a board, e.g. serial:/dev/ttyACM0@921600",
		Parse: parseSerial,
		Format: func(l Link) string {
			return fmt.Sprintf("serial:%s@%d", l.Addr, l.Baud)
		},
		FromScenario: func(c *scenarios.Controller) (Link, bool) {
			return Link{Kind: "serial", Addr: c.Port, Baud: c.Baud}, c.Link == scenarios.LinkSerial
		},
		Dial: dialSerial,
		FirmwareEnd: func(d DialSetup, _ func(string)) (bridges.Conn, func(), error) {
			c, err := serial.Open(serial.Config{Port: d.Link.Addr, Baud: d.Link.Baud})
			if err != nil {
				return nil, nil, ConfigError(err)
			}
			return c, func() { c.Close() }, nil
		},
	})
	RegisterLinkKind(LinkKind{
		Name: "mqtt", Syntax: "mqtt:URL", Help: "controller code on an MQTT broker, e.g. mqtt:tcp://127.0.0.1:1883",
		Parse:  parseMQTT,
		Format: func(l Link) string { return "mqtt:" + l.Addr },
		FromScenario: func(c *scenarios.Controller) (Link, bool) {
			return Link{Kind: "mqtt", Addr: c.Broker}, c.Link == scenarios.LinkMQTT && c.Broker != "" && c.Broker != "embedded"
		},
		Dial: dialMQTTLink,
		FirmwareEnd: func(d DialSetup, _ func(string)) (bridges.Conn, func(), error) {
			c, err := mqtt.Dial(mqtt.Config{Broker: d.Link.Addr, Rig: d.Rig, Role: mqtt.RoleFirmware, Username: d.User, Password: d.Password})
			if err != nil {
				return nil, nil, ConfigError(err)
			}
			return c, func() { c.Close() }, nil
		},
	})
}

// exactly parses a kind spelt by one of a few fixed words; the first is
// its name.
func exactly(words ...string) func(string) (Link, bool, error) {
	return func(s string) (Link, bool, error) {
		for _, w := range words {
			if s == w {
				return Link{Kind: words[0]}, true, nil
			}
		}
		return Link{}, false, nil
	}
}

// DefaultBaud is a serial link's baud rate when --link names none (the
// common default of microcontroller boards' USB serial consoles, common
// practice).
const DefaultBaud = 115200

func parseSerial(s string) (Link, bool, error) {
	rest, ok := strings.CutPrefix(s, "serial:")
	if !ok {
		return Link{}, false, nil
	}
	l := Link{Kind: "serial", Baud: DefaultBaud}
	if i := strings.LastIndex(rest, "@"); i >= 0 {
		b, err := strconv.Atoi(rest[i+1:])
		if err != nil || b <= 0 {
			return Link{}, true, fmt.Errorf("--link %q: baud rate %q is not a positive whole number", s, rest[i+1:])
		}
		l.Baud, rest = b, rest[:i]
	}
	if rest == "" {
		return Link{}, true, fmt.Errorf("--link %q: no serial port given (e.g. serial:/dev/ttyACM0@921600)", s)
	}
	l.Addr = rest
	return l, true, nil
}

// parsePty reads "pty" or "pty@BAUD". Without a baud rate the pty
// delivers at once (Link.Baud 0); with one, both ends pace their frames.
func parsePty(s string) (Link, bool, error) {
	if s == "pty" {
		return Link{Kind: "pty"}, true, nil
	}
	rest, ok := strings.CutPrefix(s, "pty@")
	if !ok {
		return Link{}, false, nil
	}
	b, err := strconv.Atoi(rest)
	if err != nil || b <= 0 {
		return Link{}, true, fmt.Errorf("--link %q: baud rate %q is not a positive whole number (e.g. pty@921600)", s, rest)
	}
	return Link{Kind: "pty", Baud: b}, true, nil
}

// ptyConfig is the serial configuration of both ends of a pty link: paced
// at the link's baud rate when it names one.
func ptyConfig(l Link) serial.Config {
	return serial.Config{Baud: l.Baud, Pace: l.Baud > 0}
}

func parseMQTT(s string) (Link, bool, error) {
	u, ok := strings.CutPrefix(s, "mqtt:")
	if !ok {
		return Link{}, false, nil
	}
	if !strings.Contains(u, "://") {
		return Link{}, true, fmt.Errorf("--link %q: the broker URL needs a scheme, e.g. mqtt:tcp://127.0.0.1:1883", s)
	}
	return Link{Kind: "mqtt", Addr: u}, true, nil
}

// undoList collects the clean-up of what a dial started, run in reverse.
type undoList []func()

func (u *undoList) add(f ...func()) { *u = append(*u, f...) }

func (u *undoList) run() {
	for i := len(*u) - 1; i >= 0; i-- {
		(*u)[i]()
	}
}

func dialBuiltin(d DialSetup) (Opened, error) {
	if d.Lockstep {
		fw, err := reference.New(d.Firmware)
		if err != nil {
			return Opened{}, ConfigError(err)
		}
		c := inproc.NewDirect(fw)
		return Opened{Conn: c, Name: d.Link.String() + " (synchronous)", Close: func() { c.Close() }}, nil
	}
	rigConn, fwConn := inproc.Pair()
	var undo undoList
	undo.add(func() { rigConn.Close() }, startFirmware(fwConn, d.Firmware))
	return Opened{Conn: rigConn, Name: d.Link.String(), Close: undo.run}, nil
}

func dialPty(d DialSetup) (Opened, error) {
	var undo undoList
	p, err := serial.NewPty()
	if err != nil {
		return Opened{}, fmt.Errorf("pty: %w", err)
	}
	undo.add(func() { p.Close() })
	fwConn := serial.NewConn(p.Master, "pty master", ptyConfig(d.Link))
	rc := ptyConfig(d.Link)
	rc.Port = p.Path
	rigConn, err := serial.Open(rc)
	if err != nil {
		undo.run()
		return Opened{}, fmt.Errorf("pty %s: %w", p.Path, err)
	}
	if err := p.ReleaseFollower(); err != nil {
		rigConn.Close()
		undo.run()
		return Opened{}, err
	}
	undo.add(func() { rigConn.Close() }, startFirmware(fwConn, d.Firmware))
	name := "pty (" + p.Path + ", built-in firmware)"
	if d.Link.Baud > 0 {
		name = fmt.Sprintf("pty (%s, built-in firmware, paced at %d baud)", p.Path, d.Link.Baud)
	}
	return Opened{Conn: rigConn, Name: name, Close: undo.run}, nil
}

// firmwareOnPty makes a new pty pair and serves the firmware on its leader;
// the rig opens the follower by its path.
func firmwareOnPty(d DialSetup, announce func(string)) (bridges.Conn, func(), error) {
	p, err := serial.NewPty()
	if err != nil {
		return nil, nil, ConfigError(err)
	}
	c := serial.NewConn(p.Master, "pty master", ptyConfig(d.Link))
	// The follower stays open here for the whole run: with no process
	// holding it, the leader reads EIO until the rig opens the port, and
	// the firmware would take that for an unplugged cable. A rig that goes
	// away is noticed by its stop message or the idle timeout.
	announce(fmt.Sprintf("reference firmware waiting on a pty: run the rig with --link serial:%s", p.Path))
	return c, func() { c.Close(); p.Close() }, nil
}

func dialEmbedded(d DialSetup) (Opened, error) {
	var undo undoList
	notices := hil.NewNotices(0)
	b, err := broker.Start(broker.Config{OnRefusal: refusalNotice(notices)})
	if err != nil {
		return Opened{}, fmt.Errorf("embedded broker: %w", err)
	}
	undo.add(func() { b.Close() })
	url := "tcp://" + b.Addr()
	l, err := dialMQTT(url, d, true, &undo)
	if err != nil {
		undo.run()
		return Opened{}, err
	}
	l.Name = "mqtt:embedded (" + url + ", rig " + d.Rig + ")"
	l.Close = undo.run
	l.Notices = notices
	return l, nil
}

// refusalNotice turns each refusal of the embedded broker into a notice
// for the running loop. It runs on the broker's goroutines and never
// blocks: the queue drops (and counts) what does not fit.
func refusalNotice(q *hil.Notices) func(broker.Refusal) {
	return func(f broker.Refusal) {
		msg := f.Reason
		if f.ClientID != "" && !strings.Contains(msg, f.ClientID) {
			msg += " (client id " + strconv.Quote(f.ClientID) + ")"
		}
		msg += " (from " + f.Remote
		if f.Topic != "" {
			msg += ", topic " + f.Topic
		}
		msg += ")"
		q.Post(hil.Notice{Kind: f.Kind.String(), Message: msg})
	}
}

func dialSerial(d DialSetup) (Opened, error) {
	c, err := serial.Open(serial.Config{Port: d.Link.Addr, Baud: d.Link.Baud, OpenTimeout: 2 * time.Second})
	if err != nil {
		return Opened{}, Configf("serial link %s: %w", d.Link.Addr, err)
	}
	return Opened{Conn: c, Name: d.Link.String(), Close: func() { c.Close() }}, nil
}

func dialMQTTLink(d DialSetup) (Opened, error) {
	var undo undoList
	l, err := dialMQTT(d.Link.Addr, d, d.LocalFirmware, &undo)
	if err != nil {
		undo.run()
		return Opened{}, ConfigError(err)
	}
	l.Name = d.Link.String() + " (rig " + d.Rig + ")"
	l.Close = undo.run
	return l, nil
}

// dialMQTT connects the rig's client to url and, when withFirmware is set,
// the built-in firmware as a second client; undo collects the clean-up.
func dialMQTT(url string, d DialSetup, withFirmware bool, undo *undoList) (Opened, error) {
	rigConn, err := mqtt.Dial(mqtt.Config{Broker: url, Rig: d.Rig, Role: mqtt.RoleRig, Username: d.User, Password: d.Password})
	if err != nil {
		return Opened{}, fmt.Errorf("rig client on MQTT broker %s: %w", url, err)
	}
	undo.add(func() { rigConn.Close() })
	if withFirmware {
		fwConn, err := mqtt.Dial(mqtt.Config{Broker: url, Rig: d.Rig, Role: mqtt.RoleFirmware})
		if err != nil {
			return Opened{}, fmt.Errorf("built-in firmware client on MQTT broker %s: %w", url, err)
		}
		undo.add(func() { fwConn.Close() }, startFirmware(fwConn, d.Firmware))
	}
	return Opened{Conn: rigConn, Alarms: rigConn}, nil
}

// startFirmware runs the reference firmware on conn in a goroutine; the
// returned function closes conn and waits (bounded) for the firmware to end.
func startFirmware(conn bridges.Conn, o reference.Options) func() {
	done := make(chan struct{})
	go func() {
		defer close(done)
		_ = reference.Serve(conn, o) // the rig's record holds what matters
	}()
	return func() {
		conn.Close()
		select {
		case <-done:
		case <-time.After(2 * time.Second):
		}
	}
}
