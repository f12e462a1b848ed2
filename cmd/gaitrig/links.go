package main

import (
	"fmt"
	"time"

	"gaitrig/bridges"
	"gaitrig/bridges/broker"
	"gaitrig/bridges/inproc"
	"gaitrig/bridges/mqtt"
	"gaitrig/bridges/serial"
	"gaitrig/firmware/reference"
)

// linkSetup says which link to open and, for the links that carry the
// built-in firmware, how to run it.
type linkSetup struct {
	Spec     linkSpec
	Rig      string            // MQTT rig id; default "bench"
	Firmware reference.Options // the built-in firmware (builtin, pty, embedded, and mqtt with LocalFirmware)
	// LocalFirmware also connects the built-in firmware to an outside MQTT
	// broker (the latency measurement); normally the firmware there is
	// someone else's.
	LocalFirmware  bool
	User, Password string // MQTT login of the rig
	// Lockstep lets the builtin link run the firmware inside the rig's
	// Send (inproc.Direct): no goroutine hand-over per tick, the same
	// results. A wall-clock run keeps the firmware on its own goroutine so
	// its answers take the time they take.
	Lockstep bool
}

// openedLink is a connected link and what it started.
type openedLink struct {
	Conn   bridges.Conn
	Name   string     // for the manifest and the log
	Alarms *mqtt.Conn // non-nil when alarms can be published on the link
	Close  func()     // closes the link and stops what it started
}

// dialLink opens the link ls describes. Links to the built-in firmware start
// it on the other end: in-process channels (builtin), a real pseudo-terminal
// pair with COBS frames (pty), or two clients of the embedded MQTT broker
// (embedded).
func dialLink(ls linkSetup) (openedLink, error) {
	if ls.Rig == "" {
		ls.Rig = "bench"
	}
	var undo []func()
	closeAll := func() {
		for i := len(undo) - 1; i >= 0; i-- {
			undo[i]()
		}
	}
	fail := func(err error) (openedLink, error) { closeAll(); return openedLink{}, err }

	switch ls.Spec.Kind {
	case linkBuiltin:
		if ls.Lockstep {
			fw, err := reference.New(ls.Firmware)
			if err != nil {
				return fail(usageError{err})
			}
			d := inproc.NewDirect(fw)
			undo = append(undo, func() { d.Close() })
			return openedLink{Conn: d, Name: ls.Spec.String() + " (synchronous)", Close: closeAll}, nil
		}
		rigConn, fwConn := inproc.Pair()
		undo = append(undo, func() { rigConn.Close() }, startFirmware(fwConn, ls.Firmware))
		return openedLink{Conn: rigConn, Name: ls.Spec.String(), Close: closeAll}, nil

	case linkPty:
		p, err := serial.NewPty()
		if err != nil {
			return fail(fmt.Errorf("pty: %w", err))
		}
		undo = append(undo, func() { p.Close() })
		fwConn := serial.NewConn(p.Master, "pty master", serial.Config{})
		rigConn, err := serial.Open(serial.Config{Port: p.Path})
		if err != nil {
			return fail(fmt.Errorf("pty %s: %w", p.Path, err))
		}
		if err := p.ReleaseFollower(); err != nil {
			rigConn.Close()
			return fail(err)
		}
		undo = append(undo, func() { rigConn.Close() }, startFirmware(fwConn, ls.Firmware))
		return openedLink{Conn: rigConn, Name: "pty (" + p.Path + ", built-in firmware)", Close: closeAll}, nil

	case linkEmbedded:
		b, err := broker.Start(broker.Config{})
		if err != nil {
			return fail(fmt.Errorf("embedded broker: %w", err))
		}
		undo = append(undo, func() { b.Close() })
		url := "tcp://" + b.Addr()
		l, err := dialMQTT(url, ls, true, &undo)
		if err != nil {
			return fail(err)
		}
		l.Name = "mqtt:embedded (" + url + ", rig " + ls.Rig + ")"
		l.Close = closeAll
		return l, nil

	case linkSerial:
		c, err := serial.Open(serial.Config{Port: ls.Spec.Port, Baud: ls.Spec.Baud, OpenTimeout: 2 * time.Second})
		if err != nil {
			return fail(usageError{fmt.Errorf("serial link %s: %w", ls.Spec.Port, err)})
		}
		undo = append(undo, func() { c.Close() })
		return openedLink{Conn: c, Name: ls.Spec.String(), Close: closeAll}, nil

	case linkMQTT:
		l, err := dialMQTT(ls.Spec.URL, ls, ls.LocalFirmware, &undo)
		if err != nil {
			return fail(usageError{err})
		}
		l.Name = ls.Spec.String() + " (rig " + ls.Rig + ")"
		l.Close = closeAll
		return l, nil
	}
	return fail(badUsage("unknown link %q", ls.Spec.Kind))
}

// dialMQTT connects the rig's client to url and, when withFirmware is set,
// the built-in firmware as a second client; undo collects the clean-up.
func dialMQTT(url string, ls linkSetup, withFirmware bool, undo *[]func()) (openedLink, error) {
	rigConn, err := mqtt.Dial(mqtt.Config{Broker: url, Rig: ls.Rig, Role: mqtt.RoleRig, Username: ls.User, Password: ls.Password})
	if err != nil {
		return openedLink{}, fmt.Errorf("rig client on MQTT broker %s: %w", url, err)
	}
	*undo = append(*undo, func() { rigConn.Close() })
	if withFirmware {
		fwConn, err := mqtt.Dial(mqtt.Config{Broker: url, Rig: ls.Rig, Role: mqtt.RoleFirmware})
		if err != nil {
			return openedLink{}, fmt.Errorf("built-in firmware client on MQTT broker %s: %w", url, err)
		}
		*undo = append(*undo, func() { fwConn.Close() }, startFirmware(fwConn, ls.Firmware))
	}
	return openedLink{Conn: rigConn, Alarms: rigConn}, nil
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
