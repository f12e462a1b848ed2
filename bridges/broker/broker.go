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
// Every client has a role and, for rig and firmware clients, a rig id:
//
//   - With accounts configured (Config.Accounts), a client must log in with a
//     username and password of one of them; the account's Role and Rig decide
//     what it may do. The client id is free.
//   - Without accounts (loopback only), the client id decides: "rig.<rig>" is
//     the rig's own client for rig <rig>, "firmware.<rig>" the firmware of rig
//     <rig>; any other client id is a read-only monitor. These are the client
//     ids package bridges/mqtt uses by default.
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
// A refused subscription gets a failure code in the SUBACK. Every refusal is
// counted (Refusals), logged at warn level and passed to Config.OnRefusal
// with a plain sentence saying what was refused and why.
package broker

import (
	"crypto/tls"
	"errors"
	"fmt"
	"log/slog"
	"net"
	"sync/atomic"

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
}

// Refusal describes one publish, subscription or connection the access rules
// refused.
type Refusal struct {
	ClientID string // the MQTT client identifier of the refused client
	Username string // the username it logged in with; empty if anonymous
	Topic    string // topic or filter; for a refused connection, the will topic if any
	Action   string // "publish", "subscribe" or "connect"
	Reason   string // plain sentence for a person
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
	TLSKeyFile  string
	// Logger receives the broker's log lines. Nil discards them; pass a
	// handler at warn level to see refusals and failures only.
	Logger *slog.Logger
	// OnRefusal, when set, is called for every refusal by the access rules.
	// It runs on the broker's connection goroutine and must not block.
	OnRefusal func(Refusal)
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
	server := mochi.New(&mochi.Options{Logger: logger})
	r := &rules{root: cfg.Root, accounts: accounts, onRefusal: cfg.OnRefusal, log: logger}
	if err := server.AddHook(r, nil); err != nil {
		return nil, fmt.Errorf("broker: installing access rules: %w", err)
	}
	l := newTCPListener("gaitrig", cfg.Addr, tlsCfg)
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

// Refusals returns how many publishes, subscriptions and connections the
// access rules have refused so far.
func (b *Broker) Refusals() uint64 { return b.rules.refused.Load() }

// Close disconnects every client and stops listening. It is safe to call
// more than once.
func (b *Broker) Close() error {
	if b.closed.Swap(true) {
		return nil
	}
	return b.server.Close()
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
