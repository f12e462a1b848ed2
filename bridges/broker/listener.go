package broker

import (
	"crypto/tls"
	"log/slog"
	"net"
	"sync"
	"time"

	"github.com/mochi-mqtt/server/v2/listeners"
)

// tcpListener is the broker's TCP (or TLS) listener. It replaces mochi's
// own so that Close cannot race with a connection being accepted: mochi's
// listener closes the clients before it stops accepting, and a client
// accepted in that window joins the server's wait group while the server is
// already waiting on it. Here Close first stops accepting, then waits (with
// a bound) until every accepted connection has been taken over by the
// server, which it has once the server reads from it.
type tcpListener struct {
	id     string
	addr   string
	tlsCfg *tls.Config
	ln     net.Listener
	log    *slog.Logger

	mu      sync.Mutex
	closed  bool
	pending sync.WaitGroup // accepted connections the server has not read yet
}

// handoverWait bounds how long Close waits for accepted connections to be
// taken over by the server.
const handoverWait = time.Second

func newTCPListener(id, addr string, tlsCfg *tls.Config) *tcpListener {
	return &tcpListener{id: id, addr: addr, tlsCfg: tlsCfg}
}

func (l *tcpListener) ID() string       { return l.id }
func (l *tcpListener) Protocol() string { return "tcp" }

func (l *tcpListener) Address() string {
	if l.ln != nil {
		return l.ln.Addr().String()
	}
	return l.addr
}

func (l *tcpListener) Init(log *slog.Logger) error {
	l.log = log
	ln, err := net.Listen("tcp", l.addr)
	if err != nil {
		return err
	}
	if l.tlsCfg != nil {
		ln = tls.NewListener(ln, l.tlsCfg)
	}
	l.ln = ln
	return nil
}

func (l *tcpListener) Serve(establish listeners.EstablishFn) {
	for {
		conn, err := l.ln.Accept()
		if err != nil {
			return // closed
		}
		l.mu.Lock()
		if l.closed {
			l.mu.Unlock()
			_ = conn.Close()
			continue
		}
		l.pending.Add(1)
		l.mu.Unlock()
		w := &handoverConn{Conn: conn, handedOver: l.pending.Done}
		go func() {
			err := establish(l.id, w)
			w.handOver() // in case the server never read from it
			if err != nil {
				l.log.Debug("client connection ended", "error", err)
			}
		}()
	}
}

func (l *tcpListener) Close(closeClients listeners.CloseFn) {
	l.mu.Lock()
	if l.closed {
		l.mu.Unlock()
		return
	}
	l.closed = true
	l.mu.Unlock()
	_ = l.ln.Close()
	done := make(chan struct{})
	go func() { l.pending.Wait(); close(done) }()
	select {
	case <-done:
	case <-time.After(handoverWait):
		l.log.Warn("broker closing with client connections not yet taken over")
	}
	closeClients(l.id)
}

// handoverConn reports its first Read: by then the server has registered
// the client (mochi registers it before reading the CONNECT packet).
type handoverConn struct {
	net.Conn
	once       sync.Once
	handedOver func()
}

func (c *handoverConn) handOver() { c.once.Do(c.handedOver) }

func (c *handoverConn) Read(b []byte) (int, error) {
	c.handOver()
	return c.Conn.Read(b)
}

var _ listeners.Listener = (*tcpListener)(nil)
