// Package mqtt is the gaitrig link over an MQTT broker (the embedded one in
// package bridges/broker, or any MQTT 3.1.1 broker such as Mosquitto), built
// on github.com/eclipse/paho.mqtt.golang.
//
// # Topics
//
// Each rig has its own topic tree R = <root>/<rig> (root "gaitrig" by
// default). Every protocol message travels as one binary frame of package
// protocol (header, payload, CRC; no COBS) as the MQTT payload:
//
//	topic       what                                   sent by    QoS  retained
//	R/state     config, state, heartbeat frames        rig        0    no
//	R/command   greeting, command, heartbeat frames    firmware   0    no
//	R/stop      stop frames                            either     1    no
//	R/alarm     one JSON object per alarm              rig        1    no
//	R/status    JSON object {"state":...}              rig        1    yes
//
// The direction decides the topic, the frame's type byte what the message
// is. A frame of a type the sender's direction never carries (a state on
// R/command, say) is returned by Recv as a *bridges.FrameError. Both sides
// subscribe to R/stop, so each also receives its own stop frames; a Conn
// drops a stop frame byte-identical to one of the last few it sent itself.
//
// # Clients and status
//
// The client id defaults to "<role>.<rig>" ("rig.bench1",
// "firmware.bench1"), which is how the embedded broker identifies clients
// when it runs without accounts; with accounts, the login decides. The rig's
// client sets a retained last will on R/status,
// {"state":"offline","rig":...,"client":...,"reason":"connection lost"},
// publishes {"state":"online","rig":...,"client":...,"time":...} (or the
// last status given to PublishStatus) retained on every (re)connect, and a
// retained {"state":"offline",...,"reason":"closed","time":...} on Close;
// "time" is UTC in RFC 3339 form. The firmware role sets
// no will and may not publish alarms or status.
//
// Client ids must be unique on a broker: by the MQTT rules a second client
// with the same id takes over the session and the first is disconnected
// (and, reconnecting, takes it back). Run one rig and one firmware per rig
// id, or give outside tools their own ids.
//
// # Reconnecting
//
// paho's automatic reconnect is on. A lost connection is reported on Events
// as a bridges.LinkDisconnected event with the cause; when the link is back (and
// the subscriptions are renewed) a bridges.LinkReconnected event carries the length of
// the gap. While disconnected, Send returns an error instead of silently
// dropping the message. A broker that dies or a line that breaks is noticed
// at once; a broker that hangs with its sockets open is noticed only by the
// keep-alive, after about twice Config.KeepAlive, and until then Send may
// wait up to Config.WriteTimeout. The loop's own watchdog covers that time.
//
// # Mosquitto
//
// Mosquitto 2.0 leaves Nagle's algorithm on by default; on loopback that
// holds back some of its small writes by about 40 ms, so the slowest round
// trips take 40 ms or more (BenchmarkRoundTripMosquitto/nagle). With
// "set_tcp_nodelay true" in mosquitto.conf those outliers go away (the
// slowest were a few ms in our runs), although the median round trip was
// higher. A rig with a tight watchdog wants the bounded worst case.
//
// # Allocations
//
// paho allocates for every message it sends and receives (packet, token,
// payload); this package adds no allocation per received message in steady
// state (Recv decodes straight from paho's payload into the caller's
// Message, waiting on a reused timer) and one copy of the frame per sent
// message, because paho writes the payload after Publish has returned. The
// benchmarks in this package measure both.
package mqtt

import (
	"bytes"
	"crypto/tls"
	"encoding/json"
	"errors"
	"fmt"
	"net"
	"net/url"
	"os"
	"sync"
	"sync/atomic"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"
	"github.com/eclipse/paho.mqtt.golang/packets"

	"gaitrig/bridges"
	"gaitrig/bridges/protocol"
	"gaitrig/bridges/topics"
)

// maxFrame is the largest frame any protocol version sends.
const maxFrame = protocol.MaxFrameLen

// closeWait bounds how long Close waits for the offline status to be
// acknowledged.
const closeWait = time.Second

// echoSlots is how many of our own recent stop frames we remember to drop
// their echo from R/stop.
const echoSlots = 4

// inbound is one received MQTT message waiting for Recv.
type inbound struct {
	payload []byte // owned by paho's packet; never written to
	stop    bool   // arrived on R/stop
}

// Conn is one end of a rig's MQTT link. It implements bridges.Conn and
// bridges.Notifier. Send and Recv may run on different goroutines, one each.
type Conn struct {
	cfg    Config
	url    *url.URL
	client paho.Client

	outTopic, inTopic, stopTopic, alarmTopic, statusTopic string

	rx      chan inbound
	events  chan bridges.LinkEvent
	closed  chan struct{}
	once    sync.Once
	timer   *time.Timer    // Recv's reused deadline timer
	sendBuf [maxFrame]byte // Send's encoding buffer (one sender at a time)
	// dropped counts messages the full receive queue turned away since Recv
	// last reported them (with a FrameError); counts.Dropped keeps the total.
	dropped atomic.Uint64

	connected atomic.Bool
	firstDone atomic.Bool
	mu        sync.Mutex // guards the fields below
	down      bool       // a gap has started and not yet ended
	announced bool       // its LinkDisconnected event has been sent
	lostAt    time.Time
	lostErr   error
	status    []byte // last status from PublishStatus, republished on reconnect
	first     chan error
	echo      [echoSlots][]byte // our recent stop payloads; empty slot = none
	echoNext  int

	counts bridges.Counters
}

// Dial connects to the broker, subscribes to the topics of cfg.Role and
// returns when the link is ready to carry messages. Errors say what failed:
// a bad setting, an unreachable broker, refused credentials or a refused
// subscription.
func Dial(cfg Config) (*Conn, error) {
	u, err := cfg.normalize()
	if err != nil {
		return nil, err
	}
	c := &Conn{
		cfg:         cfg,
		url:         u,
		stopTopic:   topics.Topic(cfg.Root, cfg.Rig, topics.Stop),
		alarmTopic:  topics.Topic(cfg.Root, cfg.Rig, topics.Alarm),
		statusTopic: topics.Topic(cfg.Root, cfg.Rig, topics.Status),
		rx:          make(chan inbound, cfg.QueueLen),
		events:      make(chan bridges.LinkEvent, 32),
		closed:      make(chan struct{}),
		first:       make(chan error, 1),
	}
	out, in := topics.State, topics.Command
	if cfg.Role == RoleFirmware {
		out, in = in, out
	}
	c.outTopic, c.inTopic = topics.Topic(cfg.Root, cfg.Rig, out), topics.Topic(cfg.Root, cfg.Rig, in)
	c.timer = time.NewTimer(time.Hour)
	c.timer.Stop()

	opts := paho.NewClientOptions().
		AddBroker(u.String()).
		SetClientID(cfg.ClientID).
		SetUsername(cfg.Username).
		SetPassword(cfg.Password).
		SetProtocolVersion(4).
		SetCleanSession(true).
		SetOrderMatters(true).
		SetAutoReconnect(true).
		SetConnectRetry(false).
		SetConnectTimeout(cfg.ConnectTimeout).
		SetKeepAlive(cfg.KeepAlive).
		SetPingTimeout(cfg.KeepAlive).
		SetWriteTimeout(cfg.WriteTimeout).
		SetMaxReconnectInterval(cfg.MaxReconnectInterval).
		SetCustomOpenConnectionFn(c.open).
		SetOnConnectHandler(c.onConnect).
		SetConnectionLostHandler(c.onLost).
		SetReconnectingHandler(c.onReconnecting)
	if cfg.Role == RoleRig {
		opts.SetBinaryWill(c.statusTopic, c.statusJSON(topics.Offline, "connection lost", false), topics.Status.QoS(), topics.Status.Retained())
	}
	c.client = paho.NewClient(opts)

	tok := c.client.Connect()
	if !tok.WaitTimeout(cfg.ConnectTimeout + time.Second) {
		c.client.Disconnect(0)
		return nil, fmt.Errorf("mqtt: no answer from broker %s within %v", u.Host, cfg.ConnectTimeout)
	}
	if err := tok.Error(); err != nil {
		return nil, c.explainConnect(err)
	}
	select {
	case err := <-c.first:
		if err != nil {
			c.client.Disconnect(0)
			return nil, err
		}
	case <-time.After(2*cfg.ConnectTimeout + time.Second):
		c.client.Disconnect(0)
		return nil, fmt.Errorf("mqtt: connected to %s but the subscriptions were not confirmed within %v", u.Host, 2*cfg.ConnectTimeout)
	}
	return c, nil
}

// explainConnect turns paho's connect errors into sentences for a person.
func (c *Conn) explainConnect(err error) error {
	who := fmt.Sprintf("%s as client %q", c.url.Redacted(), c.cfg.ClientID)
	if c.cfg.Username != "" {
		who += fmt.Sprintf(" (user %q)", c.cfg.Username)
	}
	switch {
	case errors.Is(err, packets.ErrorRefusedBadUsernameOrPassword):
		return fmt.Errorf("mqtt: broker %s refused the login: wrong username or password: %w", who, err)
	case errors.Is(err, packets.ErrorRefusedNotAuthorised):
		return fmt.Errorf("mqtt: broker refused %s: not authorized (wrong username or password, or this client may not connect): %w", who, err)
	case errors.Is(err, packets.ErrorRefusedIDRejected):
		return fmt.Errorf("mqtt: broker %s rejected the client id: %w", who, err)
	case isReadTimeout(err):
		return fmt.Errorf("mqtt: cannot connect to %s: the connection was accepted but no MQTT answer came within %v (a hung broker, or not an MQTT port?): %w", who, c.cfg.ConnectTimeout, err)
	}
	return fmt.Errorf("mqtt: cannot connect to %s: %w", who, err)
}

// isReadTimeout reports a connection that was made but stayed silent.
func isReadTimeout(err error) bool {
	var op *net.OpError
	return errors.As(err, &op) && op.Op == "read" && errors.Is(err, os.ErrDeadlineExceeded)
}

// open dials the broker for paho, through cfg.Dialer when set, and adds TLS
// for the secure schemes.
func (c *Conn) open(u *url.URL, _ paho.ClientOptions) (net.Conn, error) {
	dial := c.cfg.Dialer
	if dial == nil {
		d := &net.Dialer{Timeout: c.cfg.ConnectTimeout}
		dial = d.Dial
	}
	raw, err := dial("tcp", u.Host)
	if err != nil {
		return nil, err
	}
	if !secureScheme(u.Scheme) {
		return raw, nil
	}
	tc := &tls.Config{MinVersion: tls.VersionTLS12}
	if c.cfg.TLS != nil {
		tc = c.cfg.TLS.Clone()
	}
	if tc.ServerName == "" {
		tc.ServerName = u.Hostname()
	}
	conn := tls.Client(raw, tc)
	_ = conn.SetDeadline(time.Now().Add(c.cfg.ConnectTimeout))
	if err := conn.Handshake(); err != nil {
		_ = raw.Close()
		return nil, fmt.Errorf("TLS handshake with %s: %w", u.Host, err)
	}
	_ = conn.SetDeadline(time.Time{})
	return conn, nil
}

// onConnect runs (on its own goroutine) after every successful connection:
// it renews the subscriptions, republishes the rig's status and reports the
// end of a gap.
func (c *Conn) onConnect(cl paho.Client) {
	err := c.subscribe(cl)
	if err == nil && c.cfg.Role == RoleRig {
		c.mu.Lock()
		status := c.status
		c.mu.Unlock()
		if status == nil {
			status = c.statusJSON(topics.Online, "", true)
		}
		tok := cl.Publish(c.statusTopic, topics.Status.QoS(), topics.Status.Retained(), status)
		if !tok.WaitTimeout(c.cfg.ConnectTimeout) {
			err = fmt.Errorf("mqtt: broker did not acknowledge the status on %s within %v", c.statusTopic, c.cfg.ConnectTimeout)
		} else if tok.Error() != nil {
			err = fmt.Errorf("mqtt: publishing status on %s: %w", c.statusTopic, tok.Error())
		}
	}
	if c.firstDone.CompareAndSwap(false, true) {
		// first connection: Dial reports err
		if err == nil {
			c.connected.Store(true)
		}
		c.first <- err
		return
	}
	if err != nil {
		c.event(bridges.LinkEvent{Kind: bridges.LinkDisconnected, Err: err})
		return
	}
	c.mu.Lock()
	gap := time.Since(c.lostAt)
	announce := !c.announced
	c.down, c.announced = false, false
	c.mu.Unlock()
	if announce {
		// paho runs its lost-connection callback on a goroutine of its
		// own, which has not run yet; keep the events in order.
		c.event(bridges.LinkEvent{Kind: bridges.LinkDisconnected, Err: fmt.Errorf("mqtt: lost the connection to broker %s", c.url.Host)})
	}
	c.connected.Store(true)
	c.counts.Reconnects.Add(1)
	c.event(bridges.LinkEvent{Kind: bridges.LinkReconnected, Gap: gap})
}

// subscribe asks for the incoming and stop topics and checks the answer.
func (c *Conn) subscribe(cl paho.Client) error {
	filters := map[string]byte{c.inTopic: 0, c.stopTopic: topics.Stop.QoS()}
	tok := cl.SubscribeMultiple(filters, c.handle)
	if !tok.WaitTimeout(c.cfg.ConnectTimeout) {
		return fmt.Errorf("mqtt: broker did not answer the subscription to %s and %s within %v", c.inTopic, c.stopTopic, c.cfg.ConnectTimeout)
	}
	if err := tok.Error(); err != nil {
		return fmt.Errorf("mqtt: subscribing to %s and %s: %w", c.inTopic, c.stopTopic, err)
	}
	for topic, code := range tok.(*paho.SubscribeToken).Result() {
		if code >= 0x80 {
			return fmt.Errorf("mqtt: broker refused the subscription to %s for client %q (is it the %s of rig %q?)", topic, c.cfg.ClientID, c.cfg.Role, c.cfg.Rig)
		}
	}
	return nil
}

// goneDown marks the start of a gap, once per gap. Both paho callbacks
// below call it: the reconnect callback runs in order before any
// reconnection, the lost-connection callback (which knows the cause) on a
// goroutine of its own that may run late.
func (c *Conn) goneDown() {
	c.connected.Store(false)
	if !c.down {
		c.down, c.announced = true, false
		c.lostAt, c.lostErr = time.Now(), nil
	}
}

// onReconnecting runs before every reconnection attempt.
func (c *Conn) onReconnecting(paho.Client, *paho.ClientOptions) {
	c.mu.Lock()
	c.goneDown()
	c.mu.Unlock()
}

// onLost reports the start of a gap with its cause, unless the link is
// already back (then onConnect has reported the gap).
func (c *Conn) onLost(cl paho.Client, err error) {
	c.mu.Lock()
	if !c.down && cl.IsConnectionOpen() {
		c.mu.Unlock()
		return
	}
	c.goneDown()
	c.lostErr = err
	announce := !c.announced
	c.announced = true
	c.mu.Unlock()
	if announce {
		c.event(bridges.LinkEvent{Kind: bridges.LinkDisconnected, Err: fmt.Errorf("mqtt: lost the connection to broker %s: %w", c.url.Host, err)})
	}
}

func (c *Conn) event(e bridges.LinkEvent) {
	select {
	case c.events <- e:
	default: // the loop is not draining; never block paho's goroutines
	}
}

// handle is paho's message callback. It must not block: a full queue drops
// the message and Recv reports the count.
func (c *Conn) handle(_ paho.Client, m paho.Message) {
	in := inbound{payload: m.Payload(), stop: m.Topic() == c.stopTopic}
	select {
	case c.rx <- in:
	default:
		c.dropped.Add(1)
		c.counts.Dropped.Add(1)
	}
}

// Events returns the channel of link health changes. It is never closed.
func (c *Conn) Events() <-chan bridges.LinkEvent { return c.events }

// Stats returns the link's counters so far.
func (c *Conn) Stats() bridges.Stats { return c.counts.Snapshot() }

// notConnected explains why nothing can be sent right now.
func (c *Conn) notConnected(what string) error {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.lostAt.IsZero() {
		return fmt.Errorf("mqtt: %s not sent: not connected to broker %s", what, c.url.Host)
	}
	cause := ""
	if c.lostErr != nil {
		cause = " (" + c.lostErr.Error() + ")"
	}
	return fmt.Errorf("mqtt: %s not sent: connection to broker %s lost %v ago%s; reconnecting",
		what, c.url.Host, time.Since(c.lostAt).Round(time.Millisecond), cause)
}

// SendFrame publishes one already encoded frame as it is: stop frames (type
// byte 0x30) on R/stop at QoS 1, everything else on this side's outgoing
// topic at QoS 0. Send uses the same path; fault injection and tools may
// call SendFrame with deliberately damaged frames.
func (c *Conn) SendFrame(frame []byte) error {
	if len(frame) > maxFrame {
		return fmt.Errorf("mqtt: frame of %d bytes is longer than the %d-byte limit", len(frame), maxFrame)
	}
	return c.publish(frame, len(frame) >= 2 && protocol.Type(frame[1]) == protocol.TypeStop)
}

// publish sends one payload on the stop topic (QoS 1, waiting for the
// acknowledgement) or on the outgoing topic (QoS 0, not waiting).
func (c *Conn) publish(p []byte, stop bool) error {
	select {
	case <-c.closed:
		return bridges.ErrClosed
	default:
	}
	if !c.connected.Load() {
		return c.notConnected("message")
	}
	payload := append([]byte(nil), p...) // paho writes it after Publish returns
	if stop {
		c.rememberStop(p)
		tok := c.client.Publish(c.stopTopic, topics.Stop.QoS(), false, payload)
		if err := c.await(tok, "stop on "+c.stopTopic); err != nil {
			return err
		}
	} else {
		tok := c.client.Publish(c.outTopic, topics.State.QoS(), false, payload) // state and command share QoS 0
		// A QoS 0 token is done at once only when Publish failed outright;
		// otherwise it completes after the write, which Send does not wait for.
		select {
		case <-tok.Done():
			if err := tok.Error(); err != nil {
				return fmt.Errorf("mqtt: publishing on %s: %w", c.outTopic, err)
			}
		default:
		}
	}
	c.counts.FramesSent.Add(1)
	c.counts.BytesSent.Add(uint64(len(p)))
	return nil
}

// await waits for a QoS 1 acknowledgement within the connect timeout.
func (c *Conn) await(tok paho.Token, what string) error {
	if !tok.WaitTimeout(c.cfg.ConnectTimeout) {
		return fmt.Errorf("mqtt: broker %s did not acknowledge the %s within %v", c.url.Host, what, c.cfg.ConnectTimeout)
	}
	if err := tok.Error(); err != nil {
		return fmt.Errorf("mqtt: publishing the %s: %w", what, err)
	}
	return nil
}

// rememberStop keeps a copy of a stop frame we send, to drop its echo.
func (c *Conn) rememberStop(frame []byte) {
	c.mu.Lock()
	c.echo[c.echoNext] = append(c.echo[c.echoNext][:0], frame...)
	c.echoNext = (c.echoNext + 1) % echoSlots
	c.mu.Unlock()
}

// isOwnEcho reports (and forgets) a stop frame we sent ourselves.
func (c *Conn) isOwnEcho(p []byte) bool {
	c.mu.Lock()
	defer c.mu.Unlock()
	for i := range c.echo {
		if len(c.echo[i]) > 0 && bytes.Equal(c.echo[i], p) {
			c.echo[i] = c.echo[i][:0]
			return true
		}
	}
	return false
}

// next waits for the next incoming payload other than our own stop echoes.
func (c *Conn) next(deadline time.Time) (inbound, error) {
	if n := c.dropped.Swap(0); n > 0 {
		return inbound{}, &bridges.FrameError{Reason: fmt.Sprintf("receive queue full: %d messages dropped before Recv read them", n)}
	}
	armed := false
	defer func() {
		if armed {
			c.timer.Stop()
		}
	}()
	for {
		var in inbound
		select {
		case in = <-c.rx:
		case <-c.closed:
			return inbound{}, bridges.ErrClosed
		default:
			if !deadline.IsZero() && !armed {
				d := time.Until(deadline)
				if d <= 0 {
					return inbound{}, bridges.ErrTimeout
				}
				c.timer.Reset(d)
				armed = true
			}
			var expired <-chan time.Time
			if armed {
				expired = c.timer.C
			}
			select {
			case in = <-c.rx:
			case <-c.closed:
				return inbound{}, bridges.ErrClosed
			case <-expired:
				armed = false
				return inbound{}, bridges.ErrTimeout
			}
		}
		if in.stop && c.isOwnEcho(in.payload) {
			continue
		}
		c.counts.BytesReceived.Add(uint64(len(in.payload)))
		return in, nil
	}
}

// RecvFrame waits until a frame arrives or the deadline passes (a zero
// deadline waits forever) and copies it into dst, returning its length.
// It does not decode or check the frame.
func (c *Conn) RecvFrame(deadline time.Time, dst []byte) (int, error) {
	in, err := c.next(deadline)
	if err != nil {
		return 0, err
	}
	if len(in.payload) > len(dst) {
		c.counts.FrameErrors.Add(1)
		return 0, &bridges.FrameError{Reason: fmt.Sprintf("frame of %d bytes does not fit the %d-byte buffer", len(in.payload), len(dst)), Bytes: len(in.payload)}
	}
	c.counts.FramesReceived.Add(1)
	return copy(dst, in.payload), nil
}

// PublishAlarm publishes one alarm record (a JSON object) on R/alarm at
// QoS 1 and waits for the broker's acknowledgement. Only the rig role
// publishes alarms.
func (c *Conn) PublishAlarm(alarm []byte) error {
	return c.publishJSON("alarm", c.alarmTopic, alarm, topics.Alarm.Retained())
}

// PublishStatus publishes the rig's status (a JSON object with at least a
// "state" field, by convention) retained on R/status at QoS 1, and keeps it
// to republish after a reconnect. Only the rig role publishes status.
func (c *Conn) PublishStatus(status []byte) error {
	if err := c.publishJSON("status", c.statusTopic, status, topics.Status.Retained()); err != nil {
		return err
	}
	c.mu.Lock()
	c.status = append(c.status[:0:0], status...)
	c.mu.Unlock()
	return nil
}

func (c *Conn) publishJSON(what, topic string, doc []byte, retain bool) error {
	if c.cfg.Role != RoleRig {
		return fmt.Errorf("mqtt: only the rig role publishes %s; this client is the %s of rig %q", what, c.cfg.Role, c.cfg.Rig)
	}
	if !json.Valid(doc) {
		return fmt.Errorf("mqtt: %s not sent: payload is not valid JSON: %.60q", what, doc)
	}
	select {
	case <-c.closed:
		return bridges.ErrClosed
	default:
	}
	if !c.connected.Load() {
		return c.notConnected(what)
	}
	tok := c.client.Publish(topic, topics.Alarm.QoS(), retain, append([]byte(nil), doc...)) // alarm and status share QoS 1
	return c.await(tok, what+" on "+topic)
}

// statusJSON builds the rig's own status documents; stamped ones carry the
// current time (the last will does not: it is written at connect time but
// published whenever the connection dies).
func (c *Conn) statusJSON(state, reason string, stamped bool) []byte {
	doc := topics.RigStatus{State: state, Rig: c.cfg.Rig, Client: c.cfg.ClientID, Reason: reason}
	if stamped {
		doc.Time = time.Now().UTC().Format(time.RFC3339Nano)
	}
	b, _ := json.Marshal(doc) // a struct of strings always marshals
	return b
}

// Close marks a rig offline (retained status), disconnects and releases
// the link. Recv then returns bridges.ErrClosed. Close is safe to call more
// than once.
func (c *Conn) Close() error {
	var err error
	c.once.Do(func() {
		if c.cfg.Role == RoleRig && c.connected.Load() {
			// Bounded short: if the broker is gone, its answer never comes.
			tok := c.client.Publish(c.statusTopic, topics.Status.QoS(), topics.Status.Retained(), c.statusJSON(topics.Offline, "closed", true))
			if !tok.WaitTimeout(closeWait) {
				err = fmt.Errorf("mqtt: broker %s did not acknowledge the offline status within %v", c.url.Host, closeWait)
			} else if tok.Error() != nil {
				err = fmt.Errorf("mqtt: publishing the offline status: %w", tok.Error())
			}
		}
		close(c.closed)
		c.connected.Store(false)
		c.client.Disconnect(250)
	})
	return err
}

// PublishTelemetry publishes one RigTelemetry document on R/telemetry at the
// topic's QoS (0: a lost sample is followed by the next one) and waits for
// the write. Only the rig role publishes telemetry.
func (c *Conn) PublishTelemetry(doc []byte) error {
	const what = "telemetry"
	if c.cfg.Role != RoleRig {
		return fmt.Errorf("mqtt: only the rig role publishes %s; this client is the %s of rig %q", what, c.cfg.Role, c.cfg.Rig)
	}
	if !json.Valid(doc) {
		return fmt.Errorf("mqtt: %s not sent: payload is not valid JSON: %.60q", what, doc)
	}
	select {
	case <-c.closed:
		return bridges.ErrClosed
	default:
	}
	if !c.connected.Load() {
		return c.notConnected(what)
	}
	topic := topics.Topic(c.cfg.Root, c.cfg.Rig, topics.Telemetry)
	tok := c.client.Publish(topic, topics.Telemetry.QoS(), topics.Telemetry.Retained(), append([]byte(nil), doc...))
	return c.await(tok, what+" on "+topic)
}
