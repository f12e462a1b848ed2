package serial

import (
	"testing"

	"golang.org/x/sys/unix"
)

// TestPtyMasterIsCloseOnExec: a firmware process the rig starts must not
// inherit the pty master, or it never sees the rig hang up (it would hold
// the other end open itself).
func TestPtyMasterIsCloseOnExec(t *testing.T) {
	p, err := NewPty()
	if err != nil {
		t.Fatal(err)
	}
	defer p.Close()
	flags, err := unix.FcntlInt(p.Master.Fd(), unix.F_GETFD, 0)
	if err != nil {
		t.Fatal(err)
	}
	if flags&unix.FD_CLOEXEC == 0 {
		t.Error("the pty master lacks FD_CLOEXEC: child processes inherit it")
	}
}
