package bridges

import "sync/atomic"

// Counters holds the live counts of a link, one atomic field per field of
// Stats, so that a transport's sender, receiver and reconnect goroutines
// can count without a lock and Stats() can read them at any time. The zero
// value is ready to use; a transport embeds one and counts on it directly.
type Counters struct {
	FramesSent     atomic.Uint64 // Stats.FramesSent
	FramesReceived atomic.Uint64 // Stats.FramesReceived
	FrameErrors    atomic.Uint64 // Stats.FrameErrors
	BytesSent      atomic.Uint64 // Stats.BytesSent
	BytesReceived  atomic.Uint64 // Stats.BytesReceived
	Reconnects     atomic.Uint64 // Stats.Reconnects
	Dropped        atomic.Uint64 // Stats.Dropped
}

// Snapshot returns the counts as they are now, for Conn.Stats. Each field
// is read atomically on its own, so the set is not taken at one instant
// (a frame may be counted in one field and not yet in another); that is
// enough for the run summary and the alarms that read it.
func (c *Counters) Snapshot() Stats {
	return Stats{
		FramesSent:     c.FramesSent.Load(),
		FramesReceived: c.FramesReceived.Load(),
		FrameErrors:    c.FrameErrors.Load(),
		BytesSent:      c.BytesSent.Load(),
		BytesReceived:  c.BytesReceived.Load(),
		Reconnects:     c.Reconnects.Load(),
		Dropped:        c.Dropped.Load(),
	}
}
