package broker

import (
	"log/slog"
	"sync"
	"sync/atomic"
	"time"
)

// RefusalKind says what the broker refused.
type RefusalKind uint8

// The kinds of refusal. String gives each a snake_case name for logs and
// alarm records.
const (
	RefusedLogin     RefusalKind = iota // unknown username or wrong password
	RefusedClientID                     // a client id that is not one of ours, or not this account's
	RefusedTakeover                     // a client id that is already connected (no session takeover)
	RefusedWill                         // a last will on a topic the client may not publish to
	RefusedOversized                    // a packet larger than Limits.MaxPacketBytes
	RefusedBusy                         // the broker already serves Limits.MaxClients clients
	RefusedQuota                        // a client sent more unacknowledged QoS 1/2 messages than allowed
	RefusedMalformed                    // a malformed first packet, or not a CONNECT
	RefusedPublish                      // a publish to a topic the client may not write
	RefusedSubscribe                    // a subscription to a filter the client may not read
	RefusedRetain                       // a retained message over Limits.MaxRetained or MaxRetainedBytes (delivered, not kept)
	numRefusalKinds
)

var refusalNames = [numRefusalKinds]string{
	"login", "client_id", "takeover", "will", "oversized", "busy", "quota", "malformed", "publish", "subscribe", "retain",
}

// String returns the kind's snake_case name ("client_id", "oversized", …).
func (k RefusalKind) String() string {
	if k < numRefusalKinds {
		return refusalNames[k]
	}
	return "unknown"
}

// MarshalText writes the kind's name, so a Refusal encodes to readable JSON.
func (k RefusalKind) MarshalText() ([]byte, error) { return []byte(k.String()), nil }

// Refusal describes one connection, publish, subscription or packet the
// broker refused.
type Refusal struct {
	Kind     RefusalKind // what was refused
	ClientID string      // the client's MQTT client id; empty when the CONNECT was never read
	Username string      // the username it logged in with; empty if anonymous
	Remote   string      // the client's address, host:port
	Topic    string      // topic or filter; for a refused will, the will topic
	Reason   string      // plain sentence for a person
}

// Rate limit of the refusal log: each kind logs its first logBurst
// refusals at once, then at most one per logEvery; the suppressed count is
// carried on the next line that gets through and in the summary at Close.
// A flood (a misconfigured board publishing at 1 kHz, a scan) must leave a
// trace without drowning the log.
const (
	logBurst = 5
	logEvery = time.Second
)

// refusalLog counts refusals per kind and rate-limits their log lines.
type refusalLog struct {
	log    *slog.Logger
	notify func(Refusal)
	now    func() time.Time // time.Now; tests replace it
	counts [numRefusalKinds]atomic.Uint64
	total  atomic.Uint64

	mu         sync.Mutex
	tokens     [numRefusalKinds]float64
	last       [numRefusalKinds]time.Time
	suppressed [numRefusalKinds]uint64
}

func newRefusalLog(log *slog.Logger, notify func(Refusal)) *refusalLog {
	l := &refusalLog{log: log, notify: notify, now: time.Now}
	for k := range l.tokens {
		l.tokens[k] = logBurst
	}
	return l
}

// report counts ref, logs it unless its kind is over the rate limit, and
// passes it to the caller's callback.
func (l *refusalLog) report(ref Refusal) {
	l.counts[ref.Kind].Add(1)
	l.total.Add(1)
	if ok, skipped := l.allow(ref.Kind); ok {
		attrs := []any{"kind", ref.Kind.String(), "client", ref.ClientID, "remote", ref.Remote, "reason", ref.Reason}
		if ref.Username != "" {
			attrs = append(attrs, "username", ref.Username)
		}
		if ref.Topic != "" {
			attrs = append(attrs, "topic", ref.Topic)
		}
		if skipped > 0 {
			attrs = append(attrs, "not_logged_before", skipped)
		}
		l.log.Warn("broker refused "+ref.Kind.String(), attrs...)
	}
	if l.notify != nil {
		l.notify(ref)
	}
}

// allow takes a token of kind k's bucket; when it gets one it also returns
// how many refusals of that kind were not logged since the last line.
func (l *refusalLog) allow(k RefusalKind) (bool, uint64) {
	l.mu.Lock()
	defer l.mu.Unlock()
	now := l.now()
	if !l.last[k].IsZero() {
		l.tokens[k] = min(logBurst, l.tokens[k]+float64(now.Sub(l.last[k]))/float64(logEvery))
	}
	l.last[k] = now
	if l.tokens[k] < 1 {
		l.suppressed[k]++
		return false, 0
	}
	l.tokens[k]--
	skipped := l.suppressed[k]
	l.suppressed[k] = 0
	return true, skipped
}

// snapshot returns the non-zero counts per kind.
func (l *refusalLog) snapshot() map[RefusalKind]uint64 {
	m := make(map[RefusalKind]uint64)
	for k := range l.counts {
		if n := l.counts[k].Load(); n > 0 {
			m[RefusalKind(k)] = n
		}
	}
	return m
}

// summarize logs one line with the count of every kind refused so far.
func (l *refusalLog) summarize() {
	if l.total.Load() == 0 {
		return
	}
	var attrs []any
	for k := range l.counts {
		if n := l.counts[k].Load(); n > 0 {
			attrs = append(attrs, RefusalKind(k).String(), n)
		}
	}
	l.log.Warn("broker refusals while it ran", attrs...)
}
