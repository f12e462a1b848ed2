package serial

import (
	"fmt"
	"os"

	"github.com/creack/pty"
	"golang.org/x/sys/unix"
)

// Pty is a pseudo-terminal pair standing in for a serial cable, for tests and
// for running a firmware process against the rig on one machine. The rig
// opens Path with Open, exactly as it would open /dev/ttyACM0; the other side
// (a test, the Go reference firmware, a C firmware's host shim) uses Master,
// for example through NewConn.
//
// The follower side is put into raw mode at once, so that no byte is echoed
// or translated before the rig has opened it, and the Pty holds it open until
// ReleaseFollower so that the master does not read EIO in the meantime.
type Pty struct {
	Master   *os.File // the controlling side; read and write frames here
	Path     string   // the follower's device path, e.g. /dev/pts/3
	follower *os.File
}

// NewPty opens a new pseudo-terminal pair in raw mode.
func NewPty() (*Pty, error) {
	m, f, err := pty.Open()
	if err != nil {
		return nil, fmt.Errorf("serial: opening a pty pair: %w", err)
	}
	if err := makeRaw(f); err != nil {
		m.Close()
		f.Close()
		return nil, fmt.Errorf("serial: raw mode on %s: %w", f.Name(), err)
	}
	pm, err := pollable(m)
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("serial: pty master: %w", err)
	}
	return &Pty{Master: pm, Path: f.Name(), follower: f}, nil
}

// pollable returns a non-blocking copy of f handled by Go's poller, and
// closes f. pty.Open leaves the master in blocking mode (it calls Fd()),
// and a blocking read cannot be interrupted: Close would then never take
// effect while a reader waits, and a test could not pull the cable. The copy
// keeps close-on-exec (plain dup clears it): a firmware process started by
// the rig must not inherit the master, or it would never see the rig hang up.
func pollable(f *os.File) (*os.File, error) {
	fd, err := unix.FcntlInt(f.Fd(), unix.F_DUPFD_CLOEXEC, 0)
	f.Close()
	if err != nil {
		return nil, err
	}
	if err := unix.SetNonblock(fd, true); err != nil {
		unix.Close(fd)
		return nil, err
	}
	return os.NewFile(uintptr(fd), "/dev/ptmx"), nil
}

// makeRaw applies the usual raw settings (as cfmakeraw(3) does): no echo, no
// line editing, no signals, no translation of bytes, 8 data bits.
func makeRaw(f *os.File) error {
	fd := int(f.Fd())
	t, err := unix.IoctlGetTermios(fd, unix.TCGETS)
	if err != nil {
		return err
	}
	t.Iflag &^= unix.IGNBRK | unix.BRKINT | unix.PARMRK | unix.ISTRIP | unix.INLCR | unix.IGNCR | unix.ICRNL | unix.IXON
	t.Oflag &^= unix.OPOST
	t.Lflag &^= unix.ECHO | unix.ECHONL | unix.ICANON | unix.ISIG | unix.IEXTEN
	t.Cflag &^= unix.CSIZE | unix.PARENB
	t.Cflag |= unix.CS8
	t.Cc[unix.VMIN] = 1
	t.Cc[unix.VTIME] = 0
	return unix.IoctlSetTermios(fd, unix.TCSETS, t)
}

// ReleaseFollower closes the Pty's own handle of the follower side, once the
// rig (or a firmware) has opened Path. After that, when the last holder of
// the follower closes it, reads on Master fail — that is how a test unplugs
// from the rig's side.
func (p *Pty) ReleaseFollower() error {
	if p.follower == nil {
		return nil
	}
	err := p.follower.Close()
	p.follower = nil
	return err
}

// Close closes both ends held by the Pty. Closing Master alone is how a test
// pulls the cable from the firmware's side.
func (p *Pty) Close() error {
	err := p.ReleaseFollower()
	if e := p.Master.Close(); err == nil {
		err = e
	}
	return err
}
