package broker

import (
	"bytes"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/tls"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"log/slog"
	"math/big"
	"net"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
	"time"

	paho "github.com/eclipse/paho.mqtt.golang"
	mochi "github.com/mochi-mqtt/server/v2"
)

// wait bounds every broker operation in these tests.
const wait = 5 * time.Second

func startBroker(t *testing.T, cfg Config) *Broker {
	t.Helper()
	b, err := Start(cfg)
	if err != nil {
		t.Fatalf("Start: %v", err)
	}
	t.Cleanup(func() { _ = b.Close() })
	return b
}

type clientOpts struct {
	id, user, pass string
	tls            *tls.Config
	scheme         string
	will           string
}

func dial(t *testing.T, b *Broker, o clientOpts) (paho.Client, error) {
	t.Helper()
	scheme := o.scheme
	if scheme == "" {
		scheme = "tcp"
	}
	opts := paho.NewClientOptions().
		AddBroker(scheme + "://" + b.Addr()).
		SetClientID(o.id).
		SetUsername(o.user).
		SetPassword(o.pass).
		SetAutoReconnect(false).
		SetConnectRetry(false).
		SetConnectTimeout(wait).
		SetProtocolVersion(4).
		SetTLSConfig(o.tls)
	if o.will != "" {
		opts.SetWill(o.will, "gone", 1, true)
	}
	c := paho.NewClient(opts)
	tok := c.Connect()
	if !tok.WaitTimeout(wait) {
		return nil, errTimeout
	}
	if err := tok.Error(); err != nil {
		return nil, err
	}
	t.Cleanup(func() { c.Disconnect(50) })
	return c, nil
}

var errTimeout = &net.OpError{Op: "connect", Err: os.ErrDeadlineExceeded}

func mustDial(t *testing.T, b *Broker, o clientOpts) paho.Client {
	t.Helper()
	c, err := dial(t, b, o)
	if err != nil {
		t.Fatalf("connect %q: %v", o.id, err)
	}
	return c
}

func TestStartDefaultsToLoopbackFreePort(t *testing.T) {
	b := startBroker(t, Config{})
	host, port, err := net.SplitHostPort(b.Addr())
	if err != nil {
		t.Fatalf("Addr %q: %v", b.Addr(), err)
	}
	if host != "127.0.0.1" || port == "0" || port == "" {
		t.Fatalf("Addr = %q, want 127.0.0.1 with a real port", b.Addr())
	}
	mustDial(t, b, clientOpts{id: "monitor.watcher"})
	if err := b.Close(); err != nil {
		t.Fatalf("Close: %v", err)
	}
	if err := b.Close(); err != nil {
		t.Fatalf("second Close: %v", err)
	}
}

func TestStartRefusesBadConfig(t *testing.T) {
	good := Account{Username: "u", Password: "p", Role: RoleRig, Rig: "b1"}
	cases := []struct {
		name string
		cfg  Config
		want string
	}{
		{"all interfaces without credentials", Config{Addr: "0.0.0.0:0"}, "without credentials"},
		{"empty host without credentials", Config{Addr: ":0"}, "without credentials"},
		{"IPv6 any without credentials", Config{Addr: "[::]:0"}, "without credentials"},
		{"LAN address without credentials", Config{Addr: "192.0.2.10:1883"}, "without credentials"},
		{"hostname without credentials", Config{Addr: "bench-pc:1883"}, "without credentials"},
		{"not host:port", Config{Addr: "127.0.0.1"}, "not host:port"},
		{"root with slash", Config{Root: "a/b"}, "root topic"},
		{"empty username", Config{Accounts: []Account{{Password: "p", Role: RoleMonitor}}}, "username is empty"},
		{"empty password", Config{Accounts: []Account{{Username: "u", Role: RoleMonitor}}}, "password is empty"},
		{"unknown role", Config{Accounts: []Account{{Username: "u", Password: "p", Role: "admin"}}}, `role "admin"`},
		{"rig with wildcard", Config{Accounts: []Account{{Username: "u", Password: "p", Role: RoleFirmware, Rig: "#"}}}, "rig id"},
		{"firmware without rig", Config{Accounts: []Account{{Username: "u", Password: "p", Role: RoleFirmware}}}, "rig id"},
		{"duplicate username", Config{Accounts: []Account{good, good}}, "configured twice"},
		{"cert without key", Config{TLSCertFile: "x.pem"}, "both a certificate file and a key file"},
		{"missing cert files", Config{TLSCertFile: "/nonexistent/c.pem", TLSKeyFile: "/nonexistent/k.pem"}, "/nonexistent/c.pem"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			b, err := Start(tc.cfg)
			if err == nil {
				_ = b.Close()
				t.Fatalf("Start(%+v) succeeded, want error containing %q", tc.cfg, tc.want)
			}
			if !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("error %q does not contain %q", err, tc.want)
			}
		})
	}
}

func TestStartReportsPortInUse(t *testing.T) {
	b := startBroker(t, Config{})
	_, err := Start(Config{Addr: b.Addr()})
	if err == nil || !strings.Contains(err.Error(), "cannot listen on "+b.Addr()) {
		t.Fatalf("second broker on %s: err = %v, want a clear bind error", b.Addr(), err)
	}
}

func TestLogin(t *testing.T) {
	b := startBroker(t, Config{Accounts: []Account{
		{Username: "bench", Password: "s3cret", Role: RoleRig, Rig: "b1"},
		{Username: "board", Password: "other", Role: RoleFirmware, Rig: "b1"},
	}})
	cases := []struct {
		name, user, pass string
		ok               bool
	}{
		{"right password", "bench", "s3cret", true},
		{"second account", "board", "other", true},
		{"wrong password", "bench", "guess", false},
		{"another account's password", "bench", "other", false},
		{"unknown user", "nobody", "s3cret", false},
		{"anonymous", "", "", false},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			_, err := dial(t, b, clientOpts{id: "c-" + tc.user, user: tc.user, pass: tc.pass})
			if tc.ok && err != nil {
				t.Fatalf("connect: %v", err)
			}
			if !tc.ok {
				if err == nil {
					t.Fatal("connect succeeded with bad credentials")
				}
				// mochi answers an MQTT 3.1.1 client with return code 5.
				if !strings.Contains(strings.ToLower(err.Error()), "not authorized") {
					t.Fatalf("error %q does not say the credentials were refused", err)
				}
			}
		})
	}
	if b.Refusals() != 4 {
		t.Fatalf("Refusals = %d, want 4", b.Refusals())
	}
}

// received collects messages from a monitor subscription.
type received struct {
	mu   sync.Mutex
	msgs []string // "topic payload"
	got  chan struct{}
}

// watch subscribes a monitor client, "monitor.watcher", to filter and
// collects what it receives.
func watch(t *testing.T, b *Broker, filter string) *received {
	t.Helper()
	return watchAs(t, b, clientOpts{id: "monitor.watcher"}, filter)
}

// next waits for the next message and returns all seen so far.
func (r *received) next(t *testing.T) []string {
	t.Helper()
	select {
	case <-r.got:
	case <-time.After(wait):
		t.Fatal("no message within the wait time")
	}
	r.mu.Lock()
	defer r.mu.Unlock()
	return append([]string(nil), r.msgs...)
}

func TestPublishRules(t *testing.T) {
	var mu sync.Mutex
	var reasons []string
	b := startBroker(t, Config{OnRefusal: func(r Refusal) {
		mu.Lock()
		reasons = append(reasons, r.Kind.String()+" "+r.Topic+": "+r.Reason)
		mu.Unlock()
	}})
	mon := watch(t, b, "gaitrig/#")
	cases := []struct {
		client, topic string
		allowed       bool
	}{
		{"firmware.b1", "gaitrig/b1/command", true},
		{"firmware.b1", "gaitrig/b1/stop", true},
		{"firmware.b1", "gaitrig/b2/command", false},
		{"firmware.b1", "gaitrig/b1/state", false},
		{"firmware.b1", "gaitrig/b1/status", false},
		{"firmware.b1", "gaitrig/b1/alarm", false},
		{"firmware.b1", "gaitrig/b1/command/extra", false},
		{"rig.b1", "gaitrig/b1/state", true},
		{"rig.b1", "gaitrig/b1/alarm", true},
		{"rig.b1", "gaitrig/b1/status", true},
		{"rig.b1", "gaitrig/b1/stop", true},
		{"rig.b1", "gaitrig/b1/command", false},
		{"rig.b1", "gaitrig/b2/state", false},
		{"monitor.someone", "gaitrig/b1/command", false},
	}
	clients := map[string]paho.Client{}
	refusedBefore := b.Refusals()
	wantRefused := uint64(0)
	for i, tc := range cases {
		c, ok := clients[tc.client]
		if !ok {
			c = mustDial(t, b, clientOpts{id: tc.client})
			clients[tc.client] = c
		}
		payload := tc.client + "#" + string(rune('a'+i))
		tok := c.Publish(tc.topic, 0, false, payload)
		if !tok.WaitTimeout(wait) || tok.Error() != nil {
			t.Fatalf("publish: %v", tok.Error())
		}
		if !tc.allowed {
			wantRefused++
		}
		// A marker the client may publish follows on the same connection,
		// so a wrongly delivered message would arrive before the marker.
		marker := "gaitrig/b1/stop"
		if tc.client == "monitor.someone" {
			marker = ""
		}
		if marker != "" {
			mt := c.Publish(marker, 0, false, "marker"+payload)
			if !mt.WaitTimeout(wait) || mt.Error() != nil {
				t.Fatalf("marker publish: %v", mt.Error())
			}
			var seen []string
			for {
				seen = mon.next(t)
				if seen[len(seen)-1] == marker+" marker"+payload {
					break
				}
			}
			delivered := false
			for _, s := range seen {
				if s == tc.topic+" "+payload {
					delivered = true
				}
			}
			if delivered != tc.allowed {
				t.Errorf("%s publishing to %s: delivered=%v, want %v", tc.client, tc.topic, delivered, tc.allowed)
			}
		}
	}
	// The last refused publish has no marker after it; give the broker a
	// bounded time to count it.
	for deadline := time.Now().Add(wait); b.Refusals()-refusedBefore < wantRefused && time.Now().Before(deadline); {
		time.Sleep(time.Millisecond)
	}
	if got := b.Refusals() - refusedBefore; got != wantRefused {
		t.Errorf("Refusals grew by %d, want %d", got, wantRefused)
	}
	mu.Lock()
	defer mu.Unlock()
	found := false
	for _, r := range reasons {
		if strings.Contains(r, "publish gaitrig/b2/command: the firmware of rig \"b1\" may publish only to gaitrig/b1/command, gaitrig/b1/stop") {
			found = true
		}
	}
	if !found {
		t.Errorf("no refusal explains the cross-rig publish; got %q", reasons)
	}
}

func TestSubscribeRules(t *testing.T) {
	b := startBroker(t, Config{})
	cases := []struct {
		client, filter string
		allowed        bool
	}{
		{"firmware.b1", "gaitrig/b1/state", true},
		{"firmware.b1", "gaitrig/b1/stop", true},
		{"firmware.b1", "gaitrig/b1/status", true},
		{"firmware.b1", "gaitrig/b1/command", false},
		{"firmware.b1", "gaitrig/b2/state", false},
		{"firmware.b1", "gaitrig/#", false},
		{"firmware.b1", "gaitrig/b1/+", false},
		{"rig.b1", "gaitrig/b1/command", true},
		{"rig.b1", "gaitrig/b1/stop", true},
		{"rig.b1", "gaitrig/b2/command", false},
		{"rig.b1", "gaitrig/b1/alarm", false},
		{"monitor.someone", "gaitrig/#", true},
	}
	clients := map[string]paho.Client{}
	for _, tc := range cases {
		c, ok := clients[tc.client]
		if !ok {
			c = mustDial(t, b, clientOpts{id: tc.client})
			clients[tc.client] = c
		}
		tok := c.Subscribe(tc.filter, 0, nil)
		if !tok.WaitTimeout(wait) {
			t.Fatalf("subscribe %s: no SUBACK", tc.filter)
		}
		code := tok.(*paho.SubscribeToken).Result()[tc.filter]
		if got := code < 0x80; got != tc.allowed {
			t.Errorf("%s subscribing to %s: SUBACK code 0x%02x, allowed=%v, want %v", tc.client, tc.filter, code, got, tc.allowed)
		}
	}
}

func TestWillMustBeAllowed(t *testing.T) {
	b := startBroker(t, Config{})
	if _, err := dial(t, b, clientOpts{id: "rig.b1", will: "gaitrig/b1/status"}); err != nil {
		t.Fatalf("rig with will on its status topic refused: %v", err)
	}
	if _, err := dial(t, b, clientOpts{id: "firmware.b1", will: "gaitrig/b1/status"}); err == nil {
		t.Fatal("firmware with a will on the rig's status topic was accepted")
	}
}

func TestAccountsDecideIdentity(t *testing.T) {
	b := startBroker(t, Config{Accounts: []Account{
		{Username: "board", Password: "pw", Role: RoleFirmware, Rig: "b1"},
		{Username: "viewer", Password: "pw2", Role: RoleMonitor},
	}})
	mon := watchAs(t, b, clientOpts{id: "any", user: "viewer", pass: "pw2"}, "gaitrig/#")
	// A free client id: the account, firmware of b1, decides the rights,
	// so its publish to the state topic is dropped.
	c := mustDial(t, b, clientOpts{id: "bench-board", user: "board", pass: "pw"})
	for _, p := range []struct{ topic, payload string }{
		{"gaitrig/b1/state", "forged"},
		{"gaitrig/b1/command", "real"},
	} {
		tok := c.Publish(p.topic, 0, false, p.payload)
		if !tok.WaitTimeout(wait) || tok.Error() != nil {
			t.Fatalf("publish: %v", tok.Error())
		}
	}
	seen := mon.next(t)
	if len(seen) != 1 || seen[0] != "gaitrig/b1/command real" {
		t.Fatalf("monitor saw %q, want only the command", seen)
	}
}

// watchAs subscribes a client dialled with o to filter and collects what
// it receives, so a test can watch as a user with limited rights.
func watchAs(t *testing.T, b *Broker, o clientOpts, filter string) *received {
	t.Helper()
	r := &received{got: make(chan struct{}, 64)}
	c := mustDial(t, b, o)
	tok := c.Subscribe(filter, 0, func(_ paho.Client, m paho.Message) {
		r.mu.Lock()
		r.msgs = append(r.msgs, m.Topic()+" "+string(m.Payload()))
		r.mu.Unlock()
		r.got <- struct{}{}
	})
	if !tok.WaitTimeout(wait) || tok.Error() != nil {
		t.Fatalf("subscribe %q: %v", filter, tok.Error())
	}
	return r
}

// selfSigned writes a fresh self-signed certificate for 127.0.0.1 and its
// key into dir and returns the file names and a pool that trusts it.
func selfSigned(t *testing.T, dir string) (certFile, keyFile string, pool *x509.CertPool) {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{
		SerialNumber: big.NewInt(1),
		Subject:      pkix.Name{CommonName: "gaitrig test broker"},
		NotBefore:    time.Now().Add(-time.Hour),
		NotAfter:     time.Now().Add(time.Hour),
		IPAddresses:  []net.IP{net.ParseIP("127.0.0.1")},
		KeyUsage:     x509.KeyUsageDigitalSignature | x509.KeyUsageCertSign,
		ExtKeyUsage:  []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth},
		IsCA:         true,

		BasicConstraintsValid: true,
	}
	der, err := x509.CreateCertificate(rand.Reader, tmpl, tmpl, &key.PublicKey, key)
	if err != nil {
		t.Fatal(err)
	}
	keyDER, err := x509.MarshalECPrivateKey(key)
	if err != nil {
		t.Fatal(err)
	}
	certFile = filepath.Join(dir, "cert.pem")
	keyFile = filepath.Join(dir, "key.pem")
	if err := os.WriteFile(certFile, pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der}), 0o600); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(keyFile, pem.EncodeToMemory(&pem.Block{Type: "EC PRIVATE KEY", Bytes: keyDER}), 0o600); err != nil {
		t.Fatal(err)
	}
	cert, err := x509.ParseCertificate(der)
	if err != nil {
		t.Fatal(err)
	}
	pool = x509.NewCertPool()
	pool.AddCert(cert)
	return certFile, keyFile, pool
}

func TestTLS(t *testing.T) {
	certFile, keyFile, pool := selfSigned(t, t.TempDir())
	b := startBroker(t, Config{TLSCertFile: certFile, TLSKeyFile: keyFile})
	cases := []struct {
		name   string
		scheme string
		tls    *tls.Config
		ok     bool
	}{
		{"trusted self-signed certificate", "ssl", &tls.Config{RootCAs: pool, MinVersion: tls.VersionTLS12}, true},
		{"certificate not trusted", "ssl", &tls.Config{MinVersion: tls.VersionTLS12}, false},
		{"plain TCP to a TLS listener", "tcp", nil, false},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			c, err := dial(t, b, clientOpts{id: "monitor.watcher", scheme: tc.scheme, tls: tc.tls})
			if tc.ok {
				if err != nil {
					t.Fatalf("connect: %v", err)
				}
				tok := c.Subscribe("gaitrig/#", 0, nil)
				if !tok.WaitTimeout(wait) || tok.Error() != nil {
					t.Fatalf("subscribe over TLS: %v", tok.Error())
				}
				return
			}
			if err == nil {
				t.Fatal("connect succeeded, want failure")
			}
		})
	}
}

func TestRefusalsAreLoggedAtWarn(t *testing.T) {
	var buf syncBuffer
	logger := slog.New(slog.NewTextHandler(&buf, &slog.HandlerOptions{Level: slog.LevelWarn}))
	b := startBroker(t, Config{Logger: logger})
	c := mustDial(t, b, clientOpts{id: "firmware.b1"})
	tok := c.Subscribe("gaitrig/b2/state", 0, nil)
	if !tok.WaitTimeout(wait) || tok.Error() != nil {
		t.Fatalf("subscribe: %v", tok.Error())
	}
	out := buf.String()
	if !strings.Contains(out, "level=WARN") || !strings.Contains(out, "broker refused subscribe") || !strings.Contains(out, "gaitrig/b2/state") {
		t.Fatalf("log %q lacks the refusal", out)
	}
	if strings.Contains(out, "level=INFO") {
		t.Fatalf("info lines got through a warn-level logger: %q", out)
	}
}

// syncBuffer is a bytes.Buffer safe for the broker's goroutines.
type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

// TestAllowedChecksDoNotAllocate: mochi runs the access check for every
// publish and every delivery, so an allowed check must not allocate.
func TestAllowedChecksDoNotAllocate(t *testing.T) {
	r := &rules{root: DefaultRoot}
	withAccounts := &rules{root: DefaultRoot,
		accounts: map[string]Account{"board": {Username: "board", Password: "pw", Role: RoleFirmware, Rig: "b1"}}}
	rig := &mochi.Client{ID: "rig.b1"}
	fw := &mochi.Client{ID: "x"}
	fw.Properties.Username = []byte("board")
	cases := []struct {
		name  string
		r     *rules
		cl    *mochi.Client
		topic string
		write bool
	}{
		{"rig publishes state", r, rig, "gaitrig/b1/state", true},
		{"rig receives command", r, rig, "gaitrig/b1/command", false},
		{"account firmware publishes command", withAccounts, fw, "gaitrig/b1/command", true},
		{"account firmware receives state", withAccounts, fw, "gaitrig/b1/state", false},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			ok := true
			allocs := testing.AllocsPerRun(1000, func() { ok = ok && tc.r.OnACLCheck(tc.cl, tc.topic, tc.write) })
			if !ok {
				t.Fatal("refused")
			}
			if allocs != 0 {
				t.Fatalf("%v allocations per check, want 0", allocs)
			}
		})
	}
}

func BenchmarkAllowedCheck(b *testing.B) {
	r := &rules{root: DefaultRoot}
	cl := &mochi.Client{ID: "firmware.bench1"}
	b.ReportAllocs()
	for i := 0; i < b.N; i++ {
		if !r.OnACLCheck(cl, "gaitrig/bench1/command", true) {
			b.Fatal("refused")
		}
	}
}

// TestCloseWhileClientsConnect closes the broker while clients are still
// connecting. Under -race it checks that Close and the accept path do not
// race (mochi's own listener did); in any mode Close must return.
func TestCloseWhileClientsConnect(t *testing.T) {
	for round := 0; round < 5; round++ {
		b, err := Start(Config{})
		if err != nil {
			t.Fatal(err)
		}
		addr := b.Addr()
		var wg sync.WaitGroup
		for g := 0; g < 4; g++ {
			wg.Add(1)
			go func() {
				defer wg.Done()
				for i := 0; i < 20; i++ {
					c, err := net.DialTimeout("tcp", addr, time.Second)
					if err != nil {
						return // closed
					}
					_, _ = c.Write([]byte{0x10, 0x00}) // start of a CONNECT, then hang up
					_ = c.Close()
				}
			}()
		}
		time.Sleep(time.Duration(round) * time.Millisecond)
		closed := make(chan error, 1)
		go func() { closed <- b.Close() }()
		select {
		case err := <-closed:
			if err != nil {
				t.Fatalf("Close: %v", err)
			}
		case <-time.After(wait):
			t.Fatal("Close did not return")
		}
		wg.Wait()
	}
}
