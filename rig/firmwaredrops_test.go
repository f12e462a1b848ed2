package rig

import (
	"strings"
	"testing"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/firmware/reference"
)

// The served firmware says after a session how many answers its link
// refused, once per session, and the caller's own hooks still run.
func TestServedFirmwareReportsDroppedAnswers(t *testing.T) {
	var lines []string
	var callerDrops, callerEnds int
	o := reference.Options{
		Dropped:      func(*protocol.Message, error) { callerDrops++ },
		SessionEnded: func(error) { callerEnds++ },
	}
	reportDrops(&o, func(l string) { lines = append(lines, l) })
	var m protocol.Message
	o.Dropped(&m, bridges.ErrSendBusy)
	o.Dropped(&m, bridges.ErrSendBusy)
	o.SessionEnded(nil)
	o.SessionEnded(nil) // a session without drops says nothing
	if len(lines) != 1 || !strings.Contains(lines[0], "refused 2 answers") {
		t.Errorf("announced %q, want one line naming 2 refused answers", lines)
	}
	if callerDrops != 2 || callerEnds != 2 {
		t.Errorf("the caller's hooks ran %d and %d times, want 2 and 2", callerDrops, callerEnds)
	}
}
