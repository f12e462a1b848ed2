package fleet

import (
	"context"
	"crypto/subtle"
	"embed"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"net"
	"net/http"
	"sync/atomic"
	"time"

	"gaitrig/record"
	"gaitrig/view"
)

//go:embed page
var pageFS embed.FS

// pushEvery is how often a page gets the fleet's state: twice the rate the
// rigs publish at.
const pushEvery = 500 * time.Millisecond

// maxViewers bounds the pages watching at once.
const maxViewers = 16

// Server serves the fleet page of a Watcher.
type Server struct {
	w       *Watcher
	ln      net.Listener
	srv     *http.Server
	viewers atomic.Int32
	closed  chan struct{}
}

// document is what a page gets on every push.
type document struct {
	Broker  string `json:"broker"`
	Rigs    []Rig  `json:"rigs"`
	Ignored int    `json:"ignored"`
	Caution string `json:"caution"`
}

// Serve serves the page on addr ("" is loopback at a free port); an address
// that is not loopback needs token, as the live view does.
func Serve(w *Watcher, addr, token string) (*Server, error) {
	if addr == "" {
		addr = view.DefaultAddr
	}
	host, _, err := net.SplitHostPort(addr)
	if err != nil {
		return nil, fmt.Errorf("fleet address %q: want HOST:PORT (%v)", addr, err)
	}
	if !view.IsLoopback(host) && token == "" {
		return nil, fmt.Errorf("fleet address %q is not loopback: set %s to an access token first", addr, view.TokenEnv)
	}
	ln, err := net.Listen("tcp", addr)
	if err != nil {
		return nil, fmt.Errorf("fleet: %w", err)
	}
	s := &Server{w: w, ln: ln, closed: make(chan struct{})}
	static, _ := fs.Sub(pageFS, "page")
	mux := http.NewServeMux()
	mux.Handle("GET /", http.FileServerFS(static))
	mux.HandleFunc("GET /events", s.events)
	var h http.Handler = mux
	if token != "" {
		h = guard(token, mux)
	}
	s.srv = &http.Server{Handler: h, ReadHeaderTimeout: 5 * time.Second, MaxHeaderBytes: 16 << 10}
	go s.srv.Serve(ln)
	return s, nil
}

func guard(token string, h http.Handler) http.Handler {
	want := []byte("Bearer " + token)
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		got := []byte(r.Header.Get("Authorization"))
		if q := r.URL.Query().Get("token"); q != "" {
			got = []byte("Bearer " + q)
		}
		if subtle.ConstantTimeCompare(got, want) != 1 {
			http.Error(w, "this page needs its access token: open it as ?token=…", http.StatusUnauthorized)
			return
		}
		h.ServeHTTP(w, r)
	})
}

// URL is the page's address.
func (s *Server) URL() string { return "http://" + s.ln.Addr().String() + "/" }

// Close stops serving.
func (s *Server) Close() error {
	close(s.closed)
	ctx, cancel := context.WithTimeout(context.Background(), time.Second)
	defer cancel()
	err := s.srv.Shutdown(ctx)
	if errors.Is(err, context.DeadlineExceeded) {
		err = s.srv.Close()
	}
	return err
}

// events pushes the fleet's state to one page until it leaves. A page
// that does not take a push within the write timeout is ended.
func (s *Server) events(w http.ResponseWriter, r *http.Request) {
	if s.viewers.Add(1) > maxViewers {
		s.viewers.Add(-1)
		http.Error(w, fmt.Sprintf("this page already has %d viewers", maxViewers), http.StatusServiceUnavailable)
		return
	}
	defer s.viewers.Add(-1)
	rc := http.NewResponseController(w)
	w.Header().Set("Content-Type", "text/event-stream")
	w.Header().Set("Cache-Control", "no-store")
	w.WriteHeader(http.StatusOK)
	tick := time.NewTicker(pushEvery)
	defer tick.Stop()
	for {
		doc := document{Broker: s.w.cfg.Broker, Rigs: s.w.Rigs(), Ignored: s.w.Ignored(), Caution: record.Caution}
		b, err := json.Marshal(doc)
		if err != nil {
			return
		}
		_ = rc.SetWriteDeadline(time.Now().Add(10 * time.Second))
		if _, err := fmt.Fprintf(w, "data: %s\n\n", b); err != nil || rc.Flush() != nil {
			return
		}
		select {
		case <-r.Context().Done():
			return
		case <-s.closed:
			return
		case <-tick.C:
		}
	}
}
