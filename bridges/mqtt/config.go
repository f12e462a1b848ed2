package mqtt

import (
	"crypto/tls"
	"errors"
	"fmt"
	"net"
	"net/url"
	"time"

	"gaitrig/bridges/topics"
)

// Role says which end of the link a Conn is. The roles are defined by the
// topic contract in package bridges/topics.
type Role = topics.Role

// The two ends of a rig's link.
const (
	RoleRig      = topics.RoleRig      // gaitrig itself: sends states, receives commands
	RoleFirmware = topics.RoleFirmware // the controller: sends commands, receives states
)

// DefaultRoot is the first topic level when Config.Root is empty.
const DefaultRoot = topics.DefaultRoot

// Defaults for the timing fields of Config.
const (
	DefaultConnectTimeout       = 5 * time.Second
	DefaultKeepAlive            = 2 * time.Second
	DefaultMaxReconnectInterval = time.Second
	DefaultWriteTimeout         = 500 * time.Millisecond
	DefaultQueueLen             = 256
)

// Config says where and as whom to connect.
type Config struct {
	// Broker is the broker URL: tcp://host:port (or mqtt://) for plain TCP,
	// ssl://, tls:// or mqtts:// for TLS. A missing port means 1883 for
	// plain TCP and 8883 for TLS.
	Broker string
	// Root is the first topic level. Empty means DefaultRoot.
	Root string
	// Rig is the rig id, the second topic level. Required.
	Rig string
	// Role is RoleRig or RoleFirmware. Required.
	Role Role
	// ClientID defaults to "<role>.<rig>", the id the embedded broker uses
	// to recognise a client when it runs without accounts.
	ClientID string
	// Username and Password log in to the broker (both optional). Supply
	// them from the environment or a prompt, never from a file in a
	// repository.
	Username string
	Password string // the password that goes with Username; optional
	// TLS is used for ssl://, tls:// and mqtts:// brokers. Nil means the
	// system's trusted roots and the broker's host name.
	TLS *tls.Config
	// ConnectTimeout bounds the first connection, each reconnection attempt
	// and the wait for a broker's acknowledgement. Zero means
	// DefaultConnectTimeout.
	ConnectTimeout time.Duration
	// KeepAlive is the MQTT keep-alive interval, in whole seconds (MQTT
	// counts it in seconds; a fraction is rounded up). When nothing has
	// arrived for this long a ping is sent, and a broker that does not
	// answer within another KeepAlive is declared lost, so a hung broker is
	// noticed after about twice KeepAlive. Zero means DefaultKeepAlive.
	KeepAlive time.Duration
	// MaxReconnectInterval caps the back-off between reconnection attempts.
	// Zero means DefaultMaxReconnectInterval.
	MaxReconnectInterval time.Duration
	// WriteTimeout bounds how long Send may wait to hand a message to the
	// network. Zero means DefaultWriteTimeout.
	WriteTimeout time.Duration
	// QueueLen is how many received messages wait for Recv before newer
	// ones are dropped (and reported by Recv). Zero means DefaultQueueLen.
	QueueLen int
	// JSON switches to the debug encoding: every payload is the JSON form
	// of the message (protocol.AppendJSON) instead of the binary frame. Both
	// ends must agree; it is for watching a link with mosquitto_sub, not for
	// runs at speed (parsing it allocates).
	JSON bool
	// Dialer, when set, opens the TCP connection to the broker (TLS, if
	// asked for, is then layered on top). Tests use it to cut the line.
	Dialer func(network, address string) (net.Conn, error)
}

// normalize fills defaults and checks cfg; it returns the parsed broker URL.
func (cfg *Config) normalize() (*url.URL, error) {
	if cfg.Root == "" {
		cfg.Root = DefaultRoot
	}
	if err := topics.ValidLevel(cfg.Root); err != nil {
		return nil, fmt.Errorf("mqtt: root topic %q: %w", cfg.Root, err)
	}
	if err := topics.ValidLevel(cfg.Rig); err != nil {
		return nil, fmt.Errorf("mqtt: rig id %q: %w", cfg.Rig, err)
	}
	switch cfg.Role {
	case RoleRig, RoleFirmware:
	default:
		return nil, fmt.Errorf("mqtt: role %q is not %q or %q", cfg.Role, RoleRig, RoleFirmware)
	}
	if cfg.ClientID == "" {
		cfg.ClientID = topics.ClientID(cfg.Role, cfg.Rig)
	}
	if cfg.ConnectTimeout <= 0 {
		cfg.ConnectTimeout = DefaultConnectTimeout
	}
	if cfg.KeepAlive <= 0 {
		cfg.KeepAlive = DefaultKeepAlive
	}
	if r := cfg.KeepAlive % time.Second; r != 0 {
		cfg.KeepAlive += time.Second - r // paho would truncate it, 0 s meaning off
	}
	if cfg.MaxReconnectInterval <= 0 {
		cfg.MaxReconnectInterval = DefaultMaxReconnectInterval
	}
	if cfg.WriteTimeout <= 0 {
		cfg.WriteTimeout = DefaultWriteTimeout
	}
	if cfg.QueueLen <= 0 {
		cfg.QueueLen = DefaultQueueLen
	}
	if cfg.Broker == "" {
		return nil, errors.New("mqtt: no broker URL given (for example tcp://127.0.0.1:1883)")
	}
	u, err := url.Parse(cfg.Broker)
	if err != nil {
		return nil, fmt.Errorf("mqtt: broker URL %q: %w", cfg.Broker, err)
	}
	port := ""
	switch u.Scheme {
	case "tcp", "mqtt":
		port = "1883"
	case "ssl", "tls", "mqtts":
		port = "8883"
	default:
		return nil, fmt.Errorf("mqtt: broker URL %q: scheme %q is not tcp, mqtt, ssl, tls or mqtts", cfg.Broker, u.Scheme)
	}
	if u.Hostname() == "" {
		return nil, fmt.Errorf("mqtt: broker URL %q has no host", cfg.Broker)
	}
	if u.Port() == "" {
		u.Host = net.JoinHostPort(u.Hostname(), port)
	}
	return u, nil
}

func secureScheme(s string) bool { return s == "ssl" || s == "tls" || s == "mqtts" }
