package view

import (
	"bufio"
	"math"
	"net/http"
	"strings"
	"sync"
	"testing"
	"time"

	"gaitrig/hil"
)

// A viewer that takes nothing loses frames, counted for it alone; a viewer
// that reads gets every frame; neither blocks the sender.
func TestSlowViewerDropsFramesOnly(t *testing.T) {
	var h hub
	h.init([]byte("setup"))
	stalled, _, ok1 := h.join()
	reader, _, ok2 := h.join()
	if !ok1 || !ok2 {
		t.Fatal("join refused")
	}
	got := 0
	var wg sync.WaitGroup
	wg.Add(1)
	go func() {
		defer wg.Done()
		for range reader.q {
			got++
		}
	}()
	const n = 3 * viewerQueue
	for i := 0; i < n; i++ {
		h.send(kFrame, []byte("f"))
		if i%64 == 0 {
			// Let the reader keep up: it is the fast viewer.
			for len(reader.q) > 0 {
				time.Sleep(time.Millisecond)
			}
		}
	}
	for len(reader.q) > 0 {
		time.Sleep(time.Millisecond)
	}
	h.closeAll()
	wg.Wait()
	if d := stalled.dropped.Load(); d != n-viewerQueue {
		t.Errorf("the stalled viewer dropped %d frames, want %d", d, n-viewerQueue)
	}
	if reader.dropped.Load() != 0 || got != n {
		t.Errorf("the reading viewer got %d of %d frames, dropped %d", got, n, reader.dropped.Load())
	}
	if h.dropped.Load() != n-viewerQueue {
		t.Errorf("the hub counts %d drops, want %d", h.dropped.Load(), n-viewerQueue)
	}
}

// A viewer too slow to take a step row is ended (its browser reconnects
// and gets the table in its backlog) rather than shown a table with a gap.
func TestSlowViewerIsEndedRatherThanMissAStep(t *testing.T) {
	var h hub
	h.init([]byte("setup"))
	v, _, _ := h.join()
	for i := 0; i < viewerQueue; i++ {
		h.send(kFrame, []byte("f"))
	}
	h.send(kStep, []byte("s"))
	if h.count() != 0 {
		t.Fatal("the viewer that could not take a step is still registered")
	}
	n := 0
	for range v.q {
		n++
	}
	if n != viewerQueue {
		t.Errorf("the ended viewer's queue held %d messages, want %d", n, viewerQueue)
	}
	_, backlog, _ := h.join()
	if string(backlog[len(backlog)-historyFramesOr(viewerQueue)-1]) != "s" {
		t.Error("a new viewer's backlog lacks the step")
	}
}

func historyFramesOr(n int) int { return min(n, historyFrames) }

// Everything kept for late viewers is bounded.
func TestHubKeepsBoundedHistory(t *testing.T) {
	var h hub
	h.init([]byte("setup"))
	for i := 0; i < historyFrames+10; i++ {
		h.send(kFrame, []byte("f"))
	}
	for i := 0; i < maxAlarms+5; i++ {
		h.send(kAlarm, []byte("a"))
	}
	if len(h.history) != historyFrames || len(h.alarms) != maxAlarms {
		t.Errorf("kept %d frames and %d alarms, want %d and %d", len(h.history), len(h.alarms), historyFrames, maxAlarms)
	}
	for i := 0; i < MaxViewers; i++ {
		if _, _, ok := h.join(); !ok {
			t.Fatalf("viewer %d refused", i+1)
		}
	}
	if _, _, ok := h.join(); ok {
		t.Errorf("viewer %d accepted, the limit is %d", MaxViewers+1, MaxViewers)
	}
}

// Steps written faster than they are read are counted as lost, never
// torn; under the race detector the writer and reader run at once.
func TestStepRing(t *testing.T) {
	var r stepRing
	var got []hil.StepInfo
	for i := 1; i <= 10; i++ {
		r.put(hil.StepInfo{Index: i, LengthM: float64(i) / 10, SimTimeS: math.NaN(), EndS: float64(i) - 0.5})
	}
	if lost := r.drain(func(s hil.StepInfo) { got = append(got, s) }); lost != 0 || len(got) != 10 || got[9].Index != 10 || got[9].LengthM != 1 || !math.IsNaN(got[9].SimTimeS) || got[9].EndS != 9.5 {
		t.Fatalf("drain: lost %d, got %v", lost, got)
	}
	for i := 11; i <= 10+stepRingSize+7; i++ {
		r.put(hil.StepInfo{Index: i})
	}
	got = got[:0]
	if lost := r.drain(func(s hil.StepInfo) { got = append(got, s) }); lost != 7 || len(got) != stepRingSize || got[0].Index != 18 {
		t.Fatalf("overrun: lost %d, got %d steps from %d", lost, len(got), got[0].Index)
	}
	// Concurrent: every step read is whole (LengthM = Index/10), and read
	// plus lost add up to written.
	var r2 stepRing
	const n = 20000
	done := make(chan struct{})
	go func() {
		defer close(done)
		for i := 1; i <= n; i++ {
			r2.put(hil.StepInfo{Index: i, LengthM: float64(i) / 10})
		}
	}()
	var read, lost uint64
	check := func(s hil.StepInfo) {
		read++
		if s.LengthM != float64(s.Index)/10 {
			t.Errorf("torn step: index %d length %v", s.Index, s.LengthM)
		}
	}
	for finished := false; !finished; {
		select {
		case <-done:
			finished = true
		default:
		}
		lost += r2.drain(check)
	}
	lost += r2.drain(check)
	if read+lost != n {
		t.Errorf("read %d + lost %d ≠ %d written", read, lost, n)
	}
}

// A view on an address that is not loopback refuses to start without a
// token, and with one refuses requests that lack it.
func TestTokenGuardsNonLoopback(t *testing.T) {
	if _, err := New(Config{Addr: "0.0.0.0:0"}); err == nil || !strings.Contains(err.Error(), TokenEnv) {
		t.Fatalf("a view on 0.0.0.0 without a token: %v", err)
	}
	if _, err := New(Config{Addr: "nonsense"}); err == nil {
		t.Fatal("a view on address \"nonsense\" started")
	}
	// Listen on loopback with a token: the rule is the same, and the test
	// stays on loopback.
	s, err := New(Config{Addr: "127.0.0.1:0", Token: "s3cret"})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	for _, c := range []struct {
		path, bearer string
		want         int
	}{
		{"", "", 401}, {"events", "", 401}, {"?token=wrong", "", 401}, {"", "wrong", 401},
		{"?token=s3cret", "", 200}, {"", "s3cret", 200}, {"app.js?token=s3cret", "", 200},
	} {
		req, _ := http.NewRequest("GET", s.URL()+c.path, nil)
		if c.bearer != "" {
			req.Header.Set("Authorization", "Bearer "+c.bearer)
		}
		resp, err := (&http.Client{Timeout: 10 * time.Second}).Do(req)
		if err != nil {
			t.Fatal(err)
		}
		resp.Body.Close()
		if resp.StatusCode != c.want {
			t.Errorf("GET /%s with bearer %q: %d, want %d", c.path, c.bearer, resp.StatusCode, c.want)
		}
	}
	for _, h := range []string{"127.0.0.1", "::1", "localhost", "127.1.2.3"} {
		if !IsLoopback(h) {
			t.Errorf("%s is loopback", h)
		}
	}
	for _, h := range []string{"0.0.0.0", "10.0.0.1", "example.org", "::"} {
		if IsLoopback(h) {
			t.Errorf("%s is not loopback", h)
		}
	}
}

// The stream starts with the setup and the state, each a data line.
func TestStreamStartsWithSetup(t *testing.T) {
	s, err := New(Config{Setup: Setup{Mode: "live", Scenario: "x", Caution: "c"}})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	resp, err := (&http.Client{Timeout: 10 * time.Second}).Get(s.URL() + "events")
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	if ct := resp.Header.Get("Content-Type"); ct != "text/event-stream" {
		t.Errorf("content type %q", ct)
	}
	br := bufio.NewReader(resp.Body)
	var lines []string
	for len(lines) < 2 {
		l, err := br.ReadString('\n')
		if err != nil {
			t.Fatal(err)
		}
		if l = strings.TrimSpace(l); l != "" {
			lines = append(lines, l)
		}
	}
	if !strings.HasPrefix(lines[0], `data: {"type":"setup","mode":"live","scenario":"x"`) || !strings.HasPrefix(lines[1], `data: {"type":"state","state":"greeting"`) {
		t.Errorf("stream starts %q", lines)
	}
}
