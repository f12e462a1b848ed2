package rig

import (
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
	return reference.Serve(conn, o)
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
