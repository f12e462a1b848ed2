// Package fleet serves a page listing every rig seen on a shared MQTT
// broker, built only from what the rigs publish: their retained status,
// their alarms and their decoded telemetry (docs/protocol.md, section 9).
// It connects as a read-only observer ("monitor.<name>") and keeps no state
// of its own beyond the latest of each rig, bounded in the number of rigs
// and alarms.
package fleet

import (
	"encoding/json"
	"fmt"
	"net/url"
	"sort"
	"strings"
	"sync"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"

	"gaitrig/bridges/topics"
)

// Limits of the watcher.
const (
	// MaxRigs is how many rigs the page lists; messages of further rigs are
	// counted and ignored.
	MaxRigs = 256
	// alarmsKept is how many of a rig's latest alarms are kept.
	alarmsKept = 5
	// maxPayload bounds a message the watcher reads; larger ones are
	// counted and ignored (a rig's documents are a few hundred bytes).
	maxPayload = 16 << 10
)

// Config says which broker to watch and how to log in.
type Config struct {
	// Broker is tcp://host:port (mqtt:// is the same); ssl://, tls:// or
	// mqtts:// use TLS with the system's roots.
	Broker string
	// Root is the first topic level; "" is topics.DefaultRoot.
	Root string
	// Name makes the client id "monitor.<name>".
	Name string
	// Username and Password log in (optional).
	Username, Password string
	// ConnectTimeout bounds the first connection; 0 is 10 s.
	ConnectTimeout time.Duration
}

// Rig is what the page shows of one rig.
type Rig struct {
	ID string `json:"id"` // the rig's name, the topic level after the root
	// Status is the rig's retained status document, when one was seen.
	Status *topics.RigStatus `json:"status"`
	// Telemetry is the rig's latest telemetry, when one was seen.
	Telemetry *topics.RigTelemetry `json:"telemetry"`
	// Alarms are its latest alarms, newest last.
	Alarms []Alarm `json:"alarms"`
	// AlarmsSeen counts every alarm message of the rig since the watcher
	// started.
	AlarmsSeen int `json:"alarms_seen"`
	// LastSeen is when the watcher last heard of the rig (UTC).
	LastSeen time.Time `json:"last_seen"`
}

// Alarm is the part of a rig's alarm record the page shows.
type Alarm struct {
	T        float64 `json:"t_s"`      // simulated time of the alarm, s; 0 when the record's time is not finite
	Kind     string  `json:"kind"`     // the alarm kind (friction_limit, …)
	Severity string  `json:"severity"` // warn or trip
	Message  string  `json:"message"`  // the alarm in words
}

// Watcher follows the rigs on one broker.
type Watcher struct {
	cfg    Config
	client paho.Client

	mu      sync.Mutex
	rigs    map[string]*Rig
	ignored int // messages ignored: too many rigs, too large, unreadable
}

// Watch connects to the broker as monitor.<name> and subscribes to every
// rig's status, alarm and telemetry topics; it returns once the broker has
// acknowledged the subscriptions, so nothing published after it is missed.
func Watch(cfg Config) (*Watcher, error) {
	if cfg.Root == "" {
		cfg.Root = topics.DefaultRoot
	}
	if err := topics.ValidLevel(cfg.Root); err != nil {
		return nil, fmt.Errorf("fleet: root %q: %v", cfg.Root, err)
	}
	if cfg.Name == "" {
		cfg.Name = "fleet"
	}
	if err := topics.ValidLevel(cfg.Name); err != nil {
		return nil, fmt.Errorf("fleet: name %q: %v", cfg.Name, err)
	}
	if cfg.ConnectTimeout <= 0 {
		cfg.ConnectTimeout = 10 * time.Second
	}
	broker, err := brokerURL(cfg.Broker)
	if err != nil {
		return nil, err
	}
	w := &Watcher{cfg: cfg, rigs: map[string]*Rig{}}
	// Watch returns once the broker has acknowledged the subscriptions, so
	// a rig that publishes after it (a telemetry document is not retained)
	// is seen.
	subscribed := make(chan error, 1)
	filters := map[string]byte{
		cfg.Root + "/+/" + string(topics.Status):    topics.Status.QoS(),
		cfg.Root + "/+/" + string(topics.Alarm):     topics.Alarm.QoS(),
		cfg.Root + "/+/" + string(topics.Telemetry): topics.Telemetry.QoS(),
	}
	opts := paho.NewClientOptions().AddBroker(broker).SetClientID(string(topics.RoleMonitor) + "." + cfg.Name).
		SetUsername(cfg.Username).SetPassword(cfg.Password).SetProtocolVersion(4).SetCleanSession(true).
		SetAutoReconnect(true).SetConnectTimeout(cfg.ConnectTimeout).SetKeepAlive(5 * time.Second).
		SetMaxReconnectInterval(5 * time.Second).
		SetOnConnectHandler(func(c paho.Client) {
			// A clean session forgets subscriptions: subscribe on every
			// (re)connection. The retained statuses come with it.
			tok := c.SubscribeMultiple(filters, w.message)
			go func() { // not in the handler: paho runs it on its own goroutine
				tok.Wait()
				select {
				case subscribed <- tok.Error():
				default: // a later reconnection: nobody waits
				}
			}()
		})
	w.client = paho.NewClient(opts)
	tok := w.client.Connect()
	if !tok.WaitTimeout(cfg.ConnectTimeout + time.Second) {
		w.client.Disconnect(0)
		return nil, fmt.Errorf("fleet: no answer from broker %s within %v", cfg.Broker, cfg.ConnectTimeout)
	}
	if err := tok.Error(); err != nil {
		return nil, fmt.Errorf("fleet: broker %s refused monitor.%s: %w", cfg.Broker, cfg.Name, err)
	}
	select {
	case err := <-subscribed:
		if err != nil {
			w.client.Disconnect(0)
			return nil, fmt.Errorf("fleet: broker %s refused the subscriptions of monitor.%s: %w", cfg.Broker, cfg.Name, err)
		}
	case <-time.After(cfg.ConnectTimeout):
		w.client.Disconnect(0)
		return nil, fmt.Errorf("fleet: broker %s did not acknowledge the subscriptions of monitor.%s within %v", cfg.Broker, cfg.Name, cfg.ConnectTimeout)
	}
	return w, nil
}

func brokerURL(s string) (string, error) {
	u, err := url.Parse(s)
	if err != nil || u.Host == "" {
		return "", fmt.Errorf("fleet: broker %q: want tcp://HOST:PORT", s)
	}
	switch u.Scheme {
	case "tcp", "mqtt":
		u.Scheme = "tcp"
	case "ssl", "tls", "mqtts":
		u.Scheme = "ssl"
	default:
		return "", fmt.Errorf("fleet: broker %q: scheme %q, want tcp, mqtt, ssl, tls or mqtts", s, u.Scheme)
	}
	return u.String(), nil
}

// Close disconnects from the broker.
func (w *Watcher) Close() { w.client.Disconnect(250) }

// Ignored is how many messages were ignored (too many rigs, too large,
// unreadable).
func (w *Watcher) Ignored() int {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.ignored
}

func (w *Watcher) message(_ paho.Client, m paho.Message) {
	parts := strings.Split(m.Topic(), "/")
	if len(parts) != 3 || parts[0] != w.cfg.Root || topics.ValidLevel(parts[1]) != nil {
		return
	}
	id, leaf, payload := parts[1], topics.Leaf(parts[2]), m.Payload()
	w.mu.Lock()
	defer w.mu.Unlock()
	if len(payload) > maxPayload {
		w.ignored++
		return
	}
	r := w.rigs[id]
	if r == nil {
		if len(w.rigs) >= MaxRigs {
			w.ignored++
			return
		}
		r = &Rig{ID: id, Alarms: []Alarm{}}
		w.rigs[id] = r
	}
	var err error
	switch leaf {
	case topics.Status:
		var s topics.RigStatus
		if err = json.Unmarshal(payload, &s); err == nil {
			r.Status = &s
		}
	case topics.Telemetry:
		var t topics.RigTelemetry
		if err = json.Unmarshal(payload, &t); err == nil {
			r.Telemetry = &t
		}
	case topics.Alarm:
		var a struct {
			T        json.RawMessage `json:"t_s"`
			Kind     string          `json:"kind"`
			Severity string          `json:"severity"`
			Message  string          `json:"message"`
		}
		if err = json.Unmarshal(payload, &a); err == nil {
			var t float64
			_ = json.Unmarshal(a.T, &t) // non-finite times are strings: 0 then
			r.AlarmsSeen++
			r.Alarms = append(r.Alarms, Alarm{T: t, Kind: a.Kind, Severity: a.Severity, Message: a.Message})
			if len(r.Alarms) > alarmsKept {
				r.Alarms = append(r.Alarms[:0], r.Alarms[len(r.Alarms)-alarmsKept:]...)
			}
		}
	default:
		return
	}
	if err != nil {
		w.ignored++
		return
	}
	r.LastSeen = time.Now().UTC()
}

// Rigs returns a copy of every rig seen, by id.
func (w *Watcher) Rigs() []Rig {
	w.mu.Lock()
	defer w.mu.Unlock()
	out := make([]Rig, 0, len(w.rigs))
	for _, r := range w.rigs {
		c := *r
		c.Alarms = append(make([]Alarm, 0, len(r.Alarms)), r.Alarms...) // [] in JSON, never null
		out = append(out, c)
	}
	sort.Slice(out, func(i, j int) bool { return out[i].ID < out[j].ID })
	return out
}
