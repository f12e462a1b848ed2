package hil

// This file owns notices: reports from outside the link that a running
// loop turns into alarms. The one source today is the embedded broker the
// rig starts for an MQTT run: every connection, publish or subscription it
// refuses becomes a broker_refusal alarm in the run record, so a board
// with the wrong client id, or someone probing the broker, leaves a trace.

import (
	"fmt"
	"sort"
	"strings"
	"sync"
	"sync/atomic"

	"gaitrig/bridges/protocol"
)

// Notice is one report from outside the link.
type Notice struct {
	// Kind says what was refused, in the reporter's words (the broker's
	// refusal kinds: "client_id", "publish", "oversized", …).
	Kind string
	// Message is a sentence for a person: who was refused and why.
	Message string
}

// DefaultNoticeQueue is the capacity of a notice queue made by NewNotices
// with a size of 0: enough for every refusal of a misconfigured board
// between two ticks, small enough that a flood cannot grow memory.
const DefaultNoticeQueue = 256

// Notices is a bounded queue of notices from other goroutines into the
// loop. Post never blocks: a notice that does not fit is counted and
// reported with the next one the loop takes. Every notice is also counted
// per kind, whether it was queued or not, so the loop's final summary and
// the no-greeting error hold exact totals.
type Notices struct {
	ch      chan Notice
	dropped atomic.Uint64 // posted while the queue was full, not yet reported

	mu     sync.Mutex
	counts map[string]uint64
	last   string // message of the latest notice
}

// NewNotices makes a queue holding up to size notices (0: the default).
func NewNotices(size int) *Notices {
	if size <= 0 {
		size = DefaultNoticeQueue
	}
	return &Notices{ch: make(chan Notice, size), counts: map[string]uint64{}}
}

// Post hands a notice to the loop without blocking; safe from any
// goroutine. It reports whether the notice was queued.
func (q *Notices) Post(n Notice) bool {
	q.mu.Lock()
	q.counts[n.Kind]++
	q.last = n.Message
	q.mu.Unlock()
	select {
	case q.ch <- n:
		return true
	default:
		q.dropped.Add(1)
		return false
	}
}

// Counts returns how many notices of each kind were posted so far.
func (q *Notices) Counts() map[string]uint64 {
	q.mu.Lock()
	defer q.mu.Unlock()
	out := make(map[string]uint64, len(q.counts))
	for k, v := range q.counts {
		out[k] = v
	}
	return out
}

// describe says in words what was posted: "3 refusals (client_id: 2,
// publish: 1); the latest: …", or "" when nothing was.
func (q *Notices) describe() string {
	q.mu.Lock()
	defer q.mu.Unlock()
	var total uint64
	kinds := make([]string, 0, len(q.counts))
	for k, v := range q.counts {
		total += v
		kinds = append(kinds, k)
	}
	if total == 0 {
		return ""
	}
	sort.Strings(kinds)
	parts := make([]string, len(kinds))
	for i, k := range kinds {
		parts[i] = fmt.Sprintf("%s: %d", k, q.counts[k])
	}
	return fmt.Sprintf("%d refusals (%s); the latest: %s", total, strings.Join(parts, ", "), q.last)
}

// drainNotices raises one broker_refusal alarm per queued notice (the
// alarm policy rate-limits the log lines; the count of the kind is exact)
// and reports notices the queue had no room for.
func (r *runner) drainNotices() {
	q := r.cfg.Notices
	if q == nil {
		return
	}
	for {
		select {
		case n := <-q.ch:
			lost := q.dropped.Swap(0)
			r.brokerRefusal(n, lost)
		default:
			if lost := q.dropped.Swap(0); lost > 0 {
				r.brokerRefusal(Notice{Kind: "queue", Message: "the notice queue was full"}, lost)
			}
			return
		}
	}
}

func (r *runner) brokerRefusal(n Notice, lost uint64) {
	// Notices that did not fit the queue are alarms that happened: count
	// them under the kind, as the queued ones are.
	r.al.counts[AlarmBrokerRefusal] += int(lost)
	if r.al.raise(AlarmBrokerRefusal, r.pt.tick, r.pt.s.T, -1, -1, func() (string, map[string]float64) {
		msg := "the broker refused " + n.Kind + ": " + n.Message
		if lost > 0 {
			msg += fmt.Sprintf(" (%d more refusals did not fit the notice queue)", lost)
			return msg, map[string]float64{"not_queued": float64(lost)}
		}
		return msg, nil
	}) {
		r.trip(protocol.StopEStop) // a scenario may make refusals trip
	}
}
