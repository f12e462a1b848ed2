// Package broker runs an MQTT broker inside the gaitrig process, so that a
// rig and its firmware can talk over MQTT without any outside service. It
// wraps github.com/mochi-mqtt/server/v2 and adds the rules a test rig needs.
//
// # Where it listens
//
// By default the broker listens on 127.0.0.1 with a port chosen by the
// operating system (Config.Addr "127.0.0.1:0"); Addr reports the real one.
// Any address that is not a loopback address (including an empty host such as
// ":1883", which means every interface) is refused unless at least one
// account is configured: a broker reachable from the network must not accept
// anonymous clients. TLS is optional (Config.TLSCertFile and TLSKeyFile);
// passwords sent to a non-loopback broker without TLS travel in clear text,
// so use both there.
//
// # Who is who
//
// Every client has a role and, for rig and firmware clients, a rig id, and
// its client id is bound to them:
//
//   - Without accounts (loopback only), the client id decides: "rig.<rig>"
//     is the rig's own client for rig <rig>, "firmware.<rig>" the firmware of
//     rig <rig>, "monitor" or "monitor.<name>" a read-only observer. These
//     forms are defined in package bridges/topics; bridges/mqtt uses them by
//     default. Any other client id is refused at CONNECT with return code
//     0x02 "identifier rejected" (MQTT 5: 0x85 with our sentence as the
//     reason string), so a firmware with a guessed id learns it at once
//     instead of having its publishes dropped.
//   - With accounts configured (Config.Accounts), a client must log in with
//     a username and password of one of them; the account's Role and Rig
//     decide what it may do. Account.ClientIDs, when set, lists the only
//     client ids it may use; otherwise any id will do except one of the forms
//     above naming another role or rig (a firmware account connecting as
//     "rig.<rig>" is refused).
//
// A client id that is already connected is refused (0x02 again): nobody
// can take over another client's session. With accounts, the same account
// may take its own id back, which is how a client that lost its line
// reconnects before the broker has noticed; without accounts such a client
// is refused until the broker drops the dead connection (after 1.5 × its
// keep-alive) and gets in on its next attempt.
//
// # What each role may do
//
// With R = <root>/<rig> (root defaults to "gaitrig"):
//
//	role      publish                                  subscribe (exact topics)
//	rig       R/state  R/alarm  R/status  R/stop       R/command  R/stop
//	firmware  R/command  R/stop                        R/state  R/stop  R/status
//	monitor   nothing                                  any filter
//
// A client's last will must name a topic it may publish to, otherwise the
// connection is refused. A refused publish at QoS 0 is dropped (MQTT 3.1.1
// has no way to tell the sender); at QoS 1 or 2 an MQTT 3.1.1 client is
// disconnected and an MQTT 5 client gets a "not authorized" acknowledgement.
// A refused subscription gets a failure code in the SUBACK.
//
// # Limits
//
// Nothing a client sends makes the broker grow without bound (Config.Limits,
// defaults in DefaultLimits): a packet larger than MaxPacketBytes closes the
// connection as soon as its fixed header announces the size, before any of
// it is read or stored; at most MaxClients clients are connected, and at most
// MaxPending more connections wait (ConnectWait at most) for their CONNECT;
// each client has at most MaxInflight unacknowledged QoS 1/2 messages stored
// for it, may send at most ReceiveMaximum of its own before waiting for
// acknowledgements, and at most MaxQueued messages wait to be written to it
// (more are dropped for that client, not for the others); a disconnected
// session is forgotten after SessionExpiry. Retained messages (and retained
// last wills) are kept for at most MaxRetained topics and MaxRetainedBytes
// of topic names and payloads together: without accounts anyone on the host
// may connect as "rig.<any id>" and retain a status under every id it
// invents. A retained message over either cap still reaches the clients
// subscribed at that moment, is not kept, and is reported as a refusal of
// kind "retain"; an empty retained message (which clears a topic) and a new
// message for a topic already kept, within the byte cap, are always taken.
//
// # Refusals
//
// Every refused connection, publish, subscription and oversized or
// malformed packet is counted per kind (Refusals, RefusalsByKind), logged
// at warn level when it happens (the first few of each kind at once, then at
// most one per second, with the count of those not logged; a summary per
// kind when the broker closes) and passed to Config.OnRefusal as a Refusal.
package broker

import (
	"crypto/tls"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"sync/atomic"
	"time"

	mochi "github.com/mochi-mqtt/server/v2"

	"gaitrig/bridges/topics"
)

// DefaultAddr is where the broker listens when Config.Addr is empty: the
// IPv4 loopback address with a free port picked by the operating system.
const DefaultAddr = "127.0.0.1:0"

// DefaultRoot is the first level of every gaitrig topic when Config.Root is
// empty.
const DefaultRoot = topics.DefaultRoot

// Role says what a client is allowed to do on the broker. The roles and
// their rights are the topic contract of package bridges/topics.
type Role = topics.Role

// The roles a client can have. See the package comment for their rights.
const (
	RoleRig      = topics.RoleRig      // the harness side of one rig
	RoleFirmware = topics.RoleFirmware // the controller under test on one rig
	RoleMonitor  = topics.RoleMonitor  // read-only observer of every topic
)

// Account is one username and password the broker accepts, with the role
// and rig it grants. Credentials come from the caller (for example from
// environment variables read by the command line), never from files in the
// repository.
type Account struct {
	Username string // the login name a client presents
	Password string // must not be empty; compared in constant time
	Role     Role   // what the account may read and write (see the package comment)
	Rig      string // rig id for RoleRig and RoleFirmware; ignored for RoleMonitor
	// ClientIDs, when not empty, are the only client ids the account may
	// connect with. Empty allows any id except the "rig.", "firmware." and
	// "monitor" forms of another role or rig.
	ClientIDs []string
}

// Limits bound what clients can make the broker hold. A zero field means
// the value in DefaultLimits.
type Limits struct {
	// MaxPacketBytes is the largest MQTT packet accepted, fixed header
	// included. Protocol frames are at most 512 bytes and alarm and status
	// documents a few hundred.
	MaxPacketBytes uint32
	// MaxClients is how many clients may be connected at once.
	MaxClients int
	// MaxPending is how many further connections may wait for their
	// CONNECT at once; more are closed at once.
	MaxPending int
	// ConnectWait is how long a new connection may take to send its CONNECT.
	ConnectWait time.Duration
	// MaxInflight is how many unacknowledged QoS 1/2 messages the broker
	// stores for one client.
	MaxInflight uint16
	// ReceiveMaximum is how many QoS 1/2 messages a client may send before
	// waiting for the broker's acknowledgements; a client that sends more is
	// disconnected.
	ReceiveMaximum uint16
	// MaxQueued is how many messages may wait to be written to one client;
	// more are dropped for that client.
	MaxQueued int32
	// SessionExpiry is how long the session of a disconnected client that
	// asked to keep it (clean session off) is kept.
	SessionExpiry time.Duration
	// MaxRetained is how many topics may hold a retained message at once
	// (a rig retains one, its status). A retained message for a further
	// topic is delivered to the subscribers of the moment but not kept,
	// and reported as a RefusedRetain.
	MaxRetained int
	// MaxRetainedBytes bounds the topic names and payloads of every
	// retained message together; a retained message that would go over it
	// is delivered but not kept, as with MaxRetained.
	MaxRetainedBytes int64
}

// DefaultLimits are the limits used for zero fields of Config.Limits.
var DefaultLimits = Limits{
	MaxPacketBytes: 4096,
	MaxClients:     128,
	MaxPending:     64,
	ConnectWait:    10 * time.Second,
	MaxInflight:    64,
	ReceiveMaximum: 64,
	MaxQueued:      256,
	SessionExpiry:  time.Minute,
	// Four retained topics for each of the fleet page's 256 rigs, and 1 MiB
	// (about 3 000 status documents of ~300 bytes): our choice, far above a
	// lab's fleet, far below what would trouble the host.
	MaxRetained:      1024,
	MaxRetainedBytes: 1 << 20,
}

// withDefaults returns l with every zero field set from DefaultLimits.
func (l Limits) withDefaults() Limits {
	d := DefaultLimits
	if l.MaxPacketBytes == 0 {
		l.MaxPacketBytes = d.MaxPacketBytes
	}
	if l.MaxClients <= 0 {
		l.MaxClients = d.MaxClients
	}
	if l.MaxPending <= 0 {
		l.MaxPending = d.MaxPending
	}
	if l.ConnectWait <= 0 {
		l.ConnectWait = d.ConnectWait
	}
	if l.MaxInflight == 0 {
		l.MaxInflight = d.MaxInflight
	}
	if l.ReceiveMaximum == 0 {
		l.ReceiveMaximum = d.ReceiveMaximum
	}
	if l.MaxQueued <= 0 {
		l.MaxQueued = d.MaxQueued
	}
	if l.SessionExpiry <= 0 {
		l.SessionExpiry = d.SessionExpiry
	}
	if l.MaxRetained <= 0 {
		l.MaxRetained = d.MaxRetained
	}
	if l.MaxRetainedBytes <= 0 {
		l.MaxRetainedBytes = d.MaxRetainedBytes
	}
	return l
}

// Config configures the embedded broker. The zero value is a valid,
// anonymous, loopback-only broker on a free port.
type Config struct {
	// Addr is host:port to listen on. Empty means DefaultAddr.
	Addr string
	// Root is the first topic level of the gaitrig tree. Empty means DefaultRoot.
	Root string
	// Accounts, when not empty, turns on username/password login and allows
	// listening on non-loopback addresses.
	Accounts []Account
	// TLSCertFile and TLSKeyFile, when both set, make the listener speak TLS
	// with this PEM certificate and key.
	TLSCertFile string
	TLSKeyFile  string // PEM private key of TLSCertFile; empty: no TLS
	// Logger receives the broker's log lines. Nil discards them; pass a
	// handler at warn level to see refusals and failures only.
	Logger *slog.Logger
	// OnRefusal, when set, is called for every refusal (not rate-limited),
	// when it happens. It runs on the broker's connection goroutine, possibly
	// on several at once, and must not block.
	OnRefusal func(Refusal)
	// Limits bound packets, clients and queues; zero fields mean
	// DefaultLimits.
	Limits Limits
}

// Broker is a running embedded broker.
type Broker struct {
	server   *mochi.Server
	listener *tcpListener
	rules    *rules
	closed   atomic.Bool
}

// Start checks cfg, binds the listener and starts serving. The returned
// error says which setting is wrong or why the address cannot be used.
func Start(cfg Config) (*Broker, error) {
	if cfg.Addr == "" {
		cfg.Addr = DefaultAddr
	}
	if cfg.Root == "" {
		cfg.Root = DefaultRoot
	}
	if err := topics.ValidLevel(cfg.Root); err != nil {
		return nil, fmt.Errorf("broker: root topic %q: %w", cfg.Root, err)
	}
	host, _, err := net.SplitHostPort(cfg.Addr)
	if err != nil {
		return nil, fmt.Errorf("broker: listen address %q is not host:port: %w", cfg.Addr, err)
	}
	if !isLoopback(host) && len(cfg.Accounts) == 0 {
		return nil, fmt.Errorf("broker: refusing to listen on %s without credentials: "+
			"only a loopback address (127.0.0.1, ::1, localhost) may be used without accounts; "+
			"configure at least one username and password to listen elsewhere", cfg.Addr)
	}
	accounts := make(map[string]Account, len(cfg.Accounts))
	for i, a := range cfg.Accounts {
		if err := checkAccount(a); err != nil {
			return nil, fmt.Errorf("broker: account %d (%q): %w", i+1, a.Username, err)
		}
		if _, dup := accounts[a.Username]; dup {
			return nil, fmt.Errorf("broker: account %d: username %q is configured twice", i+1, a.Username)
		}
		accounts[a.Username] = a
	}

	var tlsCfg *tls.Config
	switch {
	case cfg.TLSCertFile != "" && cfg.TLSKeyFile != "":
		cert, err := tls.LoadX509KeyPair(cfg.TLSCertFile, cfg.TLSKeyFile)
		if err != nil {
			return nil, fmt.Errorf("broker: loading TLS certificate %s and key %s: %w", cfg.TLSCertFile, cfg.TLSKeyFile, err)
		}
		tlsCfg = &tls.Config{Certificates: []tls.Certificate{cert}, MinVersion: tls.VersionTLS12}
	case cfg.TLSCertFile != "" || cfg.TLSKeyFile != "":
		return nil, errors.New("broker: TLS needs both a certificate file and a key file; only one was given")
	}

	logger := cfg.Logger
	if logger == nil {
		logger = slog.New(slog.DiscardHandler)
	}
	lim := cfg.Limits.withDefaults()
	caps := mochi.NewDefaultServerCapabilities()
	caps.MaximumPacketSize = lim.MaxPacketBytes
	caps.MaximumClients = int64(lim.MaxClients)
	caps.MaximumInflight = lim.MaxInflight
	caps.ReceiveMaximum = lim.ReceiveMaximum
	caps.MaximumClientWritesPending = lim.MaxQueued
	caps.MaximumSessionExpiryInterval = uint32((lim.SessionExpiry + time.Second - 1) / time.Second)
	server := mochi.New(&mochi.Options{Logger: logger, Capabilities: caps})
	r := &rules{server: server, root: cfg.Root, accounts: accounts, limits: lim,
		refusals: newRefusalLog(logger, cfg.OnRefusal), claims: make(map[string]claim),
		retained: newRetainedCap(lim.MaxRetained, lim.MaxRetainedBytes)}
	if err := server.AddHook(r, nil); err != nil {
		return nil, fmt.Errorf("broker: installing access rules: %w", err)
	}
	l := newTCPListener("gaitrig", cfg.Addr, tlsCfg, lim, r)
	if err := server.AddListener(l); err != nil {
		return nil, fmt.Errorf("broker: cannot listen on %s: %w", cfg.Addr, err)
	}
	if err := server.Serve(); err != nil {
		_ = server.Close()
		return nil, fmt.Errorf("broker: starting: %w", err)
	}
	return &Broker{server: server, listener: l, rules: r}, nil
}

// Addr returns the host:port the broker actually listens on (with the real
// port when port 0 was asked for).
func (b *Broker) Addr() string { return b.listener.Address() }

// Holds reports whether a live connection holds clientID, so that a second
// connection with the same id would be refused as a takeover. A client that
// has just disconnected holds its id until the broker has processed the
// disconnect; a peer that reuses the id (a firmware restarting) can wait for
// Holds to turn false instead of guessing a delay.
func (b *Broker) Holds(clientID string) bool {
	b.rules.mu.Lock()
	defer b.rules.mu.Unlock()
	c, ok := b.rules.claims[clientID]
	return ok && !c.cl.Closed()
}

// Retained returns how many topics hold a retained message and how many
// bytes of topic names and payloads they hold together, as counted against
// Limits.MaxRetained and MaxRetainedBytes.
func (b *Broker) Retained() (topics int, bytes int64) { return b.rules.retained.usage() }

// Refusals returns how many connections, publishes, subscriptions and
// packets the broker has refused so far, of every kind.
func (b *Broker) Refusals() uint64 { return b.rules.refusals.total.Load() }

// RefusalsByKind returns a snapshot of the refusals so far, counted per
// kind; kinds never refused are absent.
func (b *Broker) RefusalsByKind() map[RefusalKind]uint64 { return b.rules.refusals.snapshot() }

// Close disconnects every client and stops listening, then logs the count
// of each kind of refusal. It is safe to call more than once.
func (b *Broker) Close() error {
	if b.closed.Swap(true) {
		return nil
	}
	err := b.server.Close()
	b.rules.refusals.summarize()
	return err
}

// isLoopback reports whether host (as written in a listen address) names
// only the loopback interface. An empty host means all interfaces.
func isLoopback(host string) bool {
	if host == "localhost" {
		return true
	}
	ip := net.ParseIP(host)
	return ip != nil && ip.IsLoopback()
}

func checkAccount(a Account) error {
	if a.Username == "" {
		return errors.New("username is empty")
	}
	if a.Password == "" {
		return errors.New("password is empty")
	}
	switch a.Role {
	case RoleRig, RoleFirmware:
		if err := topics.ValidLevel(a.Rig); err != nil {
			return fmt.Errorf("rig id %q: %w", a.Rig, err)
		}
	case RoleMonitor:
	default:
		return fmt.Errorf("role %q is not one of %q, %q, %q", a.Role, RoleRig, RoleFirmware, RoleMonitor)
	}
	return nil
}
