package rig

import (
	"fmt"

	"gaitrig/bridges/protocol"
	"gaitrig/firmware/reference"
)

// ServeFirmware runs the built-in reference firmware as a board or a
// controller process would, on the firmware's end of the link that link
// (in --link syntax) names, until the rig stops it: pty (a new pair whose
// path announce tells), serial:PORT[@BAUD] or mqtt:URL (as rig, with the
// login user and password). It returns nil when the rig ended the run
// normally, an error wrapping reference.ErrRigStopped when the rig stopped
// it for another reason, and a configuration error (ErrConfig) when the
// link cannot be opened.
func ServeFirmware(link, rig, user, password string, o reference.Options, announce func(string)) error {
	l, err := ParseLink(link)
	if err != nil {
		return err
	}
	k := linkKinds[l.Kind]
	if k.FirmwareEnd == nil {
		return Configf("--link %q: the firmware cannot be served over this link; want one of %s", link, firmwareLinks())
	}
	if rig == "" {
		rig = "bench"
	}
	conn, closeConn, err := k.FirmwareEnd(DialSetup{Link: l, Rig: rig, User: user, Password: password}, announce)
	if err != nil {
		return err
	}
	defer closeConn()
	reportDrops(&o, announce)
	return reference.Serve(conn, o)
}

// reportDrops makes the firmware say, after each session, how many of its
// answers the link refused because its send queue was full (the rig had
// not read the ones before: a starved or stalled rig host), keeping any
// hooks the caller set. The firmware drops such answers and goes on; the
// rig's resends ask again, so the count is what tells a bench engineer why
// the rig saw resends and stale answers.
func reportDrops(o *reference.Options, announce func(string)) {
	var n uint64
	dropped, ended := o.Dropped, o.SessionEnded
	o.Dropped = func(m *protocol.Message, err error) {
		n++
		if dropped != nil {
			dropped(m, err)
		}
	}
	o.SessionEnded = func(err error) {
		if n > 0 {
			announce(fmt.Sprintf("firmware: the link refused %d answers this session (send queue full: the rig had not read the ones before); they were dropped, and the rig's resends asked again", n))
			n = 0
		}
		if ended != nil {
			ended(err)
		}
	}
}

// firmwareLinks lists the --link syntax of the kinds ServeFirmware serves.
func firmwareLinks() string {
	s := ""
	for _, k := range LinkKinds() {
		if k.FirmwareEnd == nil {
			continue
		}
		if s != "" {
			s += ", "
		}
		s += k.Syntax
	}
	return s
}
