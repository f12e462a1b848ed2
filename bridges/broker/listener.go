package broker

import (
	"crypto/tls"
	"fmt"
	"log/slog"
	"net"
	"sync"
	"sync/atomic"
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
//
// It also bounds what mochi leaves open: a new connection must send its
// CONNECT within Limits.ConnectWait (mochi sets no deadline until then), at
// most MaxClients+MaxPending connections are open at once, and every
// connection that ends with an error is shown to the rules, which report
// the refusals mochi made on its own (oversized packet, too many clients).
type tcpListener struct {
	id     string
	addr   string
	tlsCfg *tls.Config
	limits Limits
	rules  *rules
	ln     net.Listener
	log    *slog.Logger
	open   atomic.Int64 // connections accepted and not yet ended

	mu      sync.Mutex
	closed  bool
	pending sync.WaitGroup // accepted connections the server has not read yet
}

// handoverWait bounds how long Close waits for accepted connections to be
// taken over by the server.
const handoverWait = time.Second

func newTCPListener(id, addr string, tlsCfg *tls.Config, limits Limits, r *rules) *tcpListener {
	return &tcpListener{id: id, addr: addr, tlsCfg: tlsCfg, limits: limits, rules: r}
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
		if l.open.Load() >= int64(l.limits.MaxClients+l.limits.MaxPending) {
			l.mu.Unlock()
			l.rules.refusals.report(Refusal{Kind: RefusedBusy, Remote: conn.RemoteAddr().String(),
				Reason: fmt.Sprintf("%d connections are open already (limit %d clients + %d connecting); closed at once",
					l.open.Load(), l.limits.MaxClients, l.limits.MaxPending)})
			_ = conn.Close()
			continue
		}
		l.open.Add(1)
		l.pending.Add(1)
		l.mu.Unlock()
		_ = conn.SetDeadline(time.Now().Add(l.limits.ConnectWait)) // mochi replaces it after the CONNECT
		w := &handoverConn{Conn: conn, handedOver: l.pending.Done}
		go func() {
			defer l.open.Add(-1)
			err := establish(l.id, w)
			w.handOver() // in case the server never read from it
			if err != nil {
				l.log.Debug("client connection ended", "error", err)
				l.rules.connectionEnded(w, err)
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
// the client (mochi registers it before reading the CONNECT packet). It
// also carries what the rules learned about the connection, so that the
// listener can report how it ended.
type handoverConn struct {
	net.Conn
	once       sync.Once
	handedOver func()

	clientID atomic.Pointer[string] // set once the CONNECT is read
	accepted atomic.Bool            // the rules let the client in
	reported atomic.Bool            // the rules refused it and said so
}

func (c *handoverConn) handOver() { c.once.Do(c.handedOver) }

func (c *handoverConn) Read(b []byte) (int, error) {
	c.handOver()
	return c.Conn.Read(b)
}

var _ listeners.Listener = (*tcpListener)(nil)
