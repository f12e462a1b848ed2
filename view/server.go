package view

// This file owns the HTTP side: the listener and its access rule, the
// page, the event stream and the hub that fans messages out to viewers,
// each through a bounded queue of its own.

import (
	"context"
	"crypto/subtle"
	"embed"
	"errors"
	"fmt"
	"io/fs"
	"mime"
	"net"
	"net/http"
	"sync"
	"sync/atomic"
	"time"
)

//go:embed page
var pageFS embed.FS

// TokenEnv is the environment variable that holds the access token a view
// on a non-loopback address requires.
const TokenEnv = "GAITRIG_VIEW_TOKEN"

// Limits of the server. Everything it keeps is bounded by one of these.
const (
	// DefaultAddr is where a view listens when no address is given: the
	// loopback interface, a free port.
	DefaultAddr = "127.0.0.1:0"
	// MaxViewers is how many pages may watch at once; more get 503.
	MaxViewers = 16
	// viewerQueue is how many messages wait for one viewer before its
	// frames are dropped (about 5 s of frames at 50 per second).
	viewerQueue = 256
	// historyFrames is how many recent frames a page that joins late gets,
	// to fill its strip charts (10 s at 50 per second).
	historyFrames = 500
	// maxSteps and maxAlarms bound the step table and the alarm list kept
	// for pages that join late; a page that watched from the start keeps
	// its own copy.
	maxSteps  = 20000
	maxAlarms = 1000
	// writeTimeout ends a viewer whose browser has accepted nothing for
	// this long (a closed laptop).
	writeTimeout = 10 * time.Second
)

// Config says where and how a Server listens.
type Config struct {
	// Addr is host:port; "" is DefaultAddr. An address that is not
	// loopback needs Token.
	Addr string
	// Token, when set, must be given by every request, as ?token= or an
	// "Authorization: Bearer" header.
	Token string
	// Setup is sent to every page first.
	Setup Setup
}

// Server serves the page and the event stream of one run or replay.
type Server struct {
	cfg Config
	ln  net.Listener
	srv *http.Server
	hub hub

	// control is set by a replay for pause, speed and seek requests.
	control atomic.Pointer[controlFunc]

	closeOnce sync.Once
	closed    chan struct{}
	bg        sync.WaitGroup // goroutines feeding the hub
}

// IsLoopback reports whether host (a name or an IP, without port) is on
// the loopback interface: localhost, 127.0.0.0/8 or ::1.
func IsLoopback(host string) bool {
	if host == "localhost" {
		return true
	}
	ip := net.ParseIP(host)
	return ip != nil && ip.IsLoopback()
}

// New listens on cfg.Addr and starts serving.
func New(cfg Config) (*Server, error) {
	if cfg.Addr == "" {
		cfg.Addr = DefaultAddr
	}
	host, _, err := net.SplitHostPort(cfg.Addr)
	if err != nil {
		return nil, fmt.Errorf("view address %q: want HOST:PORT (%v)", cfg.Addr, err)
	}
	if !IsLoopback(host) && cfg.Token == "" {
		return nil, fmt.Errorf("view address %q is not loopback: set %s to an access token first, so only people who know it can watch", cfg.Addr, TokenEnv)
	}
	ln, err := net.Listen("tcp", cfg.Addr)
	if err != nil {
		return nil, fmt.Errorf("view: %w", err)
	}
	s := &Server{cfg: cfg, ln: ln, closed: make(chan struct{})}
	s.hub.init(encode(struct {
		Type string `json:"type"`
		Setup
	}{"setup", cfg.Setup}))
	mux := http.NewServeMux()
	static, _ := fs.Sub(pageFS, "page")
	mux.Handle("GET /", s.guard(http.FileServerFS(static)))
	mux.Handle("GET /events", s.guard(http.HandlerFunc(s.events)))
	mux.Handle("POST /control", s.guard(http.HandlerFunc(s.controlHTTP)))
	s.srv = &http.Server{Handler: mux, ReadHeaderTimeout: 5 * time.Second, MaxHeaderBytes: 16 << 10}
	go s.srv.Serve(ln)
	return s, nil
}

// URL is the address of the page (without the token).
func (s *Server) URL() string { return "http://" + s.ln.Addr().String() + "/" }

// Close stops the feeding goroutines, ends every stream and closes the
// listener.
func (s *Server) Close() error {
	s.closeOnce.Do(func() { close(s.closed) })
	s.bg.Wait()
	ctx, cancel := context.WithTimeout(context.Background(), time.Second)
	defer cancel()
	s.hub.closeAll()
	err := s.srv.Shutdown(ctx)
	if errors.Is(err, context.DeadlineExceeded) {
		err = s.srv.Close()
	}
	return err
}

// Viewers is how many pages are watching now.
func (s *Server) Viewers() int { return s.hub.count() }

// Dropped is how many frames were dropped for slow viewers so far, over
// all viewers.
func (s *Server) Dropped() uint64 { return s.hub.dropped.Load() }

// guard refuses requests without the token when one is set.
func (s *Server) guard(h http.Handler) http.Handler {
	if s.cfg.Token == "" {
		return h
	}
	want := []byte("Bearer " + s.cfg.Token)
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		got := []byte(r.Header.Get("Authorization"))
		if q := r.URL.Query().Get("token"); q != "" {
			got = []byte("Bearer " + q)
		}
		if subtle.ConstantTimeCompare(got, want) != 1 {
			http.Error(w, "this view needs its access token: open it as ?token=… (the value of "+TokenEnv+" on the rig)", http.StatusUnauthorized)
			return
		}
		h.ServeHTTP(w, r)
	})
}

// events is the event stream of one viewer.
func (s *Server) events(w http.ResponseWriter, r *http.Request) {
	rc := http.NewResponseController(w)
	v, backlog, ok := s.hub.join()
	if !ok {
		http.Error(w, fmt.Sprintf("this view already has %d viewers; close one", MaxViewers), http.StatusServiceUnavailable)
		return
	}
	defer s.hub.leave(v)
	h := w.Header()
	h.Set("Content-Type", "text/event-stream")
	h.Set("Cache-Control", "no-store")
	h.Set("X-Content-Type-Options", "nosniff")
	w.WriteHeader(http.StatusOK)
	write := func(b []byte) bool {
		_ = rc.SetWriteDeadline(time.Now().Add(writeTimeout))
		if _, err := w.Write(b); err != nil {
			return false
		}
		return rc.Flush() == nil
	}
	for _, b := range backlog {
		if !write(b) {
			return
		}
	}
	var told uint64
	for {
		select {
		case b, open := <-v.q:
			if !open {
				return
			}
			if !write(b) {
				return
			}
			if d := v.dropped.Load(); d != told {
				told = d
				if !write(encode(struct {
					Type    string `json:"type"`
					Dropped uint64 `json:"dropped"`
				}{"drops", d})) {
					return
				}
			}
		case <-r.Context().Done():
			return
		case <-s.closed:
			// Send what is queued (the final state), then end.
			for {
				select {
				case b, open := <-v.q:
					if !open || !write(b) {
						return
					}
				default:
					return
				}
			}
		}
	}
}

// controlReq is a replay control request; absent fields are unchanged.
type controlReq struct {
	Pause *bool    `json:"pause"`
	Speed *float64 `json:"speed"`
	Seek  *float64 `json:"seek"`
}

func (s *Server) controlHTTP(w http.ResponseWriter, r *http.Request) {
	ctl := s.control.Load()
	if ctl == nil {
		http.Error(w, "this view shows a live run: there is nothing to pause or seek", http.StatusConflict)
		return
	}
	// Only JSON: a page on another site can POST text/plain or a form
	// without the browser asking this server first, but not JSON.
	if mt, _, _ := mime.ParseMediaType(r.Header.Get("Content-Type")); mt != "application/json" {
		http.Error(w, "control: send a JSON object with Content-Type: application/json", http.StatusUnsupportedMediaType)
		return
	}
	var c controlReq
	if err := decodeSmall(r, &c); err != nil {
		http.Error(w, err.Error(), http.StatusBadRequest)
		return
	}
	if err := ctl.f(c); err != nil {
		http.Error(w, err.Error(), http.StatusBadRequest)
		return
	}
	w.WriteHeader(http.StatusNoContent)
}

// controlFunc carries a replay's control function.
type controlFunc struct{ f func(controlReq) error }

// viewer is one page's queue.
type viewer struct {
	q       chan []byte
	dropped atomic.Uint64
}

// hub keeps what a late page needs and fans messages out. It runs off the
// loop: its lock is taken by the server's goroutines only.
type hub struct {
	mu      sync.Mutex
	viewers map[*viewer]struct{}
	setup   []byte
	state   []byte
	notes   [][]byte
	history [][]byte // ring of the last historyFrames frames
	histAt  int
	steps   [][]byte
	alarms  [][]byte
	play    []byte
	lostOld int // steps and alarms no longer kept for late pages
	dropped atomic.Uint64
}

func (h *hub) init(setup []byte) {
	h.viewers = make(map[*viewer]struct{})
	h.setup = setup
	h.state = encode(stateMsg{Type: "state", State: "greeting"})
}

func (h *hub) join() (*viewer, [][]byte, bool) {
	h.mu.Lock()
	defer h.mu.Unlock()
	if h.viewers == nil || len(h.viewers) >= MaxViewers {
		return nil, nil, false
	}
	v := &viewer{q: make(chan []byte, viewerQueue)}
	h.viewers[v] = struct{}{}
	backlog := [][]byte{h.setup, h.state}
	backlog = append(backlog, h.notes...)
	backlog = append(backlog, h.steps...)
	backlog = append(backlog, h.alarms...)
	n := len(h.history)
	for i := 0; i < n; i++ {
		backlog = append(backlog, h.history[(h.histAt+i)%n])
	}
	if h.play != nil {
		backlog = append(backlog, h.play)
	}
	return v, backlog, true
}

func (h *hub) leave(v *viewer) {
	h.mu.Lock()
	defer h.mu.Unlock()
	if _, ok := h.viewers[v]; ok {
		delete(h.viewers, v)
	}
}

func (h *hub) count() int {
	h.mu.Lock()
	defer h.mu.Unlock()
	return len(h.viewers)
}

// closeAll closes every queue; streams end after sending what they hold.
func (h *hub) closeAll() {
	h.mu.Lock()
	defer h.mu.Unlock()
	for v := range h.viewers {
		close(v.q)
	}
	h.viewers = nil
}

// kind says what a message is, for what the hub keeps of it.
type kind int

const (
	kFrame kind = iota
	kStep
	kAlarm
	kState
	kNote
	kPlay
	kReset
)

// send keeps what a late page needs of b and offers b to every viewer,
// dropping it for those whose queue is full. Frames and playback
// positions may be dropped; steps, alarms and states are what a person
// reads, so a viewer too slow to take one of those is ended (its browser
// reconnects and gets them in its backlog).
func (h *hub) send(k kind, b []byte) {
	h.mu.Lock()
	defer h.mu.Unlock()
	switch k {
	case kFrame:
		if len(h.history) < historyFrames {
			h.history = append(h.history, b)
		} else {
			h.history[h.histAt] = b
			h.histAt = (h.histAt + 1) % historyFrames
		}
	case kStep:
		h.steps = keep(h.steps, b, maxSteps, &h.lostOld)
	case kAlarm:
		h.alarms = keep(h.alarms, b, maxAlarms, &h.lostOld)
	case kState:
		h.state = b
	case kNote:
		h.notes = keep(h.notes, b, 100, &h.lostOld)
	case kPlay:
		h.play = b
	case kReset:
		h.history, h.histAt, h.steps, h.alarms = nil, 0, nil, nil
	}
	for v := range h.viewers {
		select {
		case v.q <- b:
		default:
			if k == kFrame || k == kPlay {
				v.dropped.Add(1)
				h.dropped.Add(1)
				continue
			}
			close(v.q)
			delete(h.viewers, v)
		}
	}
}

// keep appends b to list, dropping the oldest beyond limit.
func keep(list [][]byte, b []byte, limit int, lost *int) [][]byte {
	if len(list) >= limit {
		*lost++
		list = append(list[:0], list[1:]...)
	}
	return append(list, b)
}
