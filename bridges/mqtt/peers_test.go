package mqtt

import (
	"bufio"
	"bytes"
	"context"
	"crypto/ecdsa"
	"crypto/elliptic"
	"crypto/rand"
	"crypto/x509"
	"crypto/x509/pkix"
	"encoding/pem"
	"errors"
	"fmt"
	"io"
	"math/big"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"gaitrig/bridges/broker"
)

// wait bounds every single wait in these tests.
const wait = 5 * time.Second

// requireTool returns the path of an outside program the test needs. When
// it is missing the test fails if GAITRIG_REQUIRE_TOOLS=1 and is skipped
// with a clear message otherwise.
func requireTool(t testing.TB, path string) string {
	t.Helper()
	if _, err := os.Stat(path); err == nil {
		return path
	}
	if p, err := exec.LookPath(filepath.Base(path)); err == nil {
		return p
	}
	msg := fmt.Sprintf("%s is not installed (Debian package mosquitto / mosquitto-clients)", path)
	if os.Getenv("GAITRIG_REQUIRE_TOOLS") == "1" {
		t.Fatalf("%s, and GAITRIG_REQUIRE_TOOLS=1 requires it", msg)
	}
	t.Skipf("%s; set GAITRIG_REQUIRE_TOOLS=1 to make this a failure", msg)
	return ""
}

// freePort asks the kernel for a free loopback port.
func freePort(t testing.TB) int {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	return l.Addr().(*net.TCPAddr).Port
}

// mosquitto is a real Mosquitto broker run by a test on a loopback port.
type mosquitto struct {
	t    testing.TB
	bin  string
	conf string
	log  string
	port int
	mu   sync.Mutex
	cmd  *exec.Cmd
	done chan struct{}
}

// startMosquitto writes a config for a free 127.0.0.1 port (plus extra
// lines) and starts /usr/sbin/mosquitto with it. The broker is stopped when
// the test ends.
func startMosquitto(t testing.TB, extra string) *mosquitto {
	t.Helper()
	bin := requireTool(t, "/usr/sbin/mosquitto")
	dir := t.TempDir()
	m := &mosquitto{t: t, bin: bin, port: freePort(t), conf: filepath.Join(dir, "mosquitto.conf"), log: filepath.Join(dir, "mosquitto.log")}
	conf := fmt.Sprintf("listener %d 127.0.0.1\npersistence false\nlog_dest file %s\nlog_type error\nlog_type warning\n", m.port, m.log)
	if os.Geteuid() == 0 {
		conf += "user root\n" // keep access to the test's files
	}
	if !strings.Contains(extra, "allow_anonymous") && !strings.Contains(extra, "password_file") {
		conf += "allow_anonymous true\n"
	}
	conf += extra
	if err := os.WriteFile(m.conf, []byte(conf), 0o600); err != nil {
		t.Fatal(err)
	}
	m.start()
	t.Cleanup(m.kill)
	return m
}

func (m *mosquitto) url(scheme string) string {
	return scheme + "://127.0.0.1:" + strconv.Itoa(m.port)
}

// start runs the broker and waits (bounded) until its port accepts.
func (m *mosquitto) start() {
	m.t.Helper()
	m.mu.Lock()
	defer m.mu.Unlock()
	cmd := exec.Command(m.bin, "-c", m.conf)
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		m.t.Fatalf("starting mosquitto: %v", err)
	}
	done := make(chan struct{})
	go func() { _ = cmd.Wait(); close(done) }()
	m.cmd, m.done = cmd, done
	deadline := time.Now().Add(wait)
	for {
		c, err := net.DialTimeout("tcp", "127.0.0.1:"+strconv.Itoa(m.port), 100*time.Millisecond)
		if err == nil {
			c.Close()
			return
		}
		select {
		case <-done:
			logText, _ := os.ReadFile(m.log)
			m.t.Fatalf("mosquitto exited at start: %s %s", stderr.String(), logText)
		default:
		}
		if time.Now().After(deadline) {
			m.t.Fatalf("mosquitto did not accept on port %d within %v: %v", m.port, wait, err)
		}
		time.Sleep(10 * time.Millisecond)
	}
}

// kill stops the broker with SIGKILL (no goodbye to its clients) and waits
// for it to exit.
func (m *mosquitto) kill() {
	m.mu.Lock()
	defer m.mu.Unlock()
	if m.cmd == nil {
		return
	}
	_ = m.cmd.Process.Signal(syscall.SIGCONT) // a stopped process must run to die
	_ = m.cmd.Process.Kill()
	<-m.done
	m.cmd = nil
}

// signal sends sig to the running broker.
func (m *mosquitto) signal(sig os.Signal) error {
	m.mu.Lock()
	defer m.mu.Unlock()
	if m.cmd == nil {
		return fmt.Errorf("mosquitto is not running")
	}
	return m.cmd.Process.Signal(sig)
}

// sub runs mosquitto_sub as an outside client and streams its output lines.
type sub struct {
	lines chan string
	done  chan struct{} // closed when mosquitto_sub has exited
	err   error         // its exit error, valid after done
}

// wait returns mosquitto_sub's exit error once it has ended (bounded by its
// context).
func (s *sub) wait() error {
	<-s.done
	return s.err
}

// subIDs numbers the mosquitto_sub clients so that their ids differ.
var subIDs atomic.Int64

// startSub runs mosquitto_sub -C count -W 5 on topic; extra arguments
// follow. Lines of its output arrive on lines; done receives its exit.
func startSub(t testing.TB, port int, topic string, count int, extra ...string) *sub {
	t.Helper()
	bin := requireTool(t, "/usr/bin/mosquitto_sub")
	ctx, cancel := context.WithTimeout(context.Background(), 2*wait)
	// A monitor client id: the embedded broker refuses ids that are not of
	// the forms in package bridges/topics.
	id := "monitor.sub-" + strconv.FormatInt(subIDs.Add(1), 10)
	args := append([]string{"-h", "127.0.0.1", "-p", strconv.Itoa(port), "-i", id, "-t", topic, "-C", strconv.Itoa(count), "-W", "5", "-V", "mqttv311"}, extra...)
	cmd := exec.CommandContext(ctx, bin, args...)
	out, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		cancel()
		t.Fatalf("starting mosquitto_sub: %v", err)
	}
	s := &sub{lines: make(chan string, 64), done: make(chan struct{})}
	go func() {
		sc := bufio.NewScanner(out)
		for sc.Scan() {
			s.lines <- sc.Text()
		}
		_, _ = io.Copy(io.Discard, out)
		err := cmd.Wait()
		if err != nil {
			err = fmt.Errorf("mosquitto_sub %v: %w (%s)", args, err, strings.TrimSpace(stderr.String()))
		}
		s.err = err
		close(s.lines)
		close(s.done)
		cancel()
	}()
	t.Cleanup(func() {
		cancel()
		<-s.done
	})
	return s
}

// line returns the next output line of mosquitto_sub, failing the test if
// none arrives in time.
func (s *sub) line(t testing.TB) string {
	t.Helper()
	select {
	case l, ok := <-s.lines:
		if !ok {
			t.Fatal("mosquitto_sub ended without another line")
		}
		return l
	case <-time.After(2 * wait):
		t.Fatal("mosquitto_sub printed nothing in time")
	}
	return ""
}

// mosquittoPub runs mosquitto_pub once with the given arguments.
func mosquittoPub(t testing.TB, port int, args ...string) {
	t.Helper()
	bin := requireTool(t, "/usr/bin/mosquitto_pub")
	ctx, cancel := context.WithTimeout(context.Background(), wait)
	defer cancel()
	all := append([]string{"-h", "127.0.0.1", "-p", strconv.Itoa(port), "-V", "mqttv311"}, args...)
	out, err := exec.CommandContext(ctx, bin, all...).CombinedOutput()
	if err != nil {
		t.Fatalf("mosquitto_pub %v: %v: %s", all, err, out)
	}
}

// embedded starts an embedded broker for the test.
func embedded(t testing.TB, cfg broker.Config) *broker.Broker {
	t.Helper()
	b, err := broker.Start(cfg)
	if err != nil {
		t.Fatalf("broker.Start: %v", err)
	}
	t.Cleanup(func() { _ = b.Close() })
	return b
}

func embeddedPort(t testing.TB, b *broker.Broker) int {
	t.Helper()
	_, p, err := net.SplitHostPort(b.Addr())
	if err != nil {
		t.Fatal(err)
	}
	n, _ := strconv.Atoi(p)
	return n
}

// selfSigned writes a fresh self-signed certificate for 127.0.0.1 and its
// key into dir; it returns the file names and the certificate in PEM.
func selfSigned(t testing.TB, dir string) (certFile, keyFile string, certPEM []byte) {
	t.Helper()
	key, err := ecdsa.GenerateKey(elliptic.P256(), rand.Reader)
	if err != nil {
		t.Fatal(err)
	}
	tmpl := &x509.Certificate{
		SerialNumber:          big.NewInt(time.Now().UnixNano()),
		Subject:               pkix.Name{CommonName: "gaitrig test broker"},
		NotBefore:             time.Now().Add(-time.Hour),
		NotAfter:              time.Now().Add(time.Hour),
		IPAddresses:           []net.IP{net.ParseIP("127.0.0.1")},
		KeyUsage:              x509.KeyUsageDigitalSignature | x509.KeyUsageCertSign,
		ExtKeyUsage:           []x509.ExtKeyUsage{x509.ExtKeyUsageServerAuth},
		IsCA:                  true,
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
	certPEM = pem.EncodeToMemory(&pem.Block{Type: "CERTIFICATE", Bytes: der})
	certFile, keyFile = filepath.Join(dir, "cert.pem"), filepath.Join(dir, "key.pem")
	if err := os.WriteFile(certFile, certPEM, 0o600); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(keyFile, pem.EncodeToMemory(&pem.Block{Type: "EC PRIVATE KEY", Bytes: keyDER}), 0o600); err != nil {
		t.Fatal(err)
	}
	return certFile, keyFile, certPEM
}

// plug is a dialer hook that can break the current connection and refuse
// new ones, like pulling a network cable.
type plug struct {
	mu        sync.Mutex
	conns     []*cutConn
	unplugged bool
}

// errPulled is what a read on a pulled line returns, as a broken cable or
// a reset from the far end would.
var errPulled = errors.New("test cable pulled")

// cutConn is a net.Conn whose reads fail with errPulled once pulled.
type cutConn struct {
	net.Conn
	pulled atomic.Bool
}

func (c *cutConn) Read(b []byte) (int, error) {
	n, err := c.Conn.Read(b)
	if c.pulled.Load() {
		return 0, errPulled
	}
	return n, err
}

func (p *plug) dial(network, addr string) (net.Conn, error) {
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.unplugged {
		return nil, errors.New("test cable unplugged")
	}
	c, err := net.DialTimeout(network, addr, wait)
	if err != nil {
		return nil, err
	}
	cc := &cutConn{Conn: c}
	p.conns = append(p.conns, cc)
	return cc, nil
}

// pull breaks every connection made so far (their blocked reads fail at
// once) and refuses new ones.
func (p *plug) pull() {
	p.mu.Lock()
	defer p.mu.Unlock()
	p.unplugged = true
	for _, c := range p.conns {
		c.pulled.Store(true)
		_ = c.Conn.SetReadDeadline(time.Now()) // wake the blocked reader
		_ = c.Conn.Close()
	}
	p.conns = nil
}

// push allows connections again.
func (p *plug) push() {
	p.mu.Lock()
	p.unplugged = false
	p.mu.Unlock()
}
