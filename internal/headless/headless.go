// Package headless drives Debian's headless Chromium for the tests of the
// pages we serve: it starts the browser with the project's flags in a
// process group of its own, opens a page, evaluates JavaScript in it and
// takes screenshots over the DevTools protocol (a WebSocket on loopback).
// Everything is bounded in time; Close kills the browser's whole group.
package headless

import (
	"bufio"
	"context"
	"encoding/base64"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"regexp"
	"strings"
	"sync"
	"syscall"
	"time"

	"github.com/gorilla/websocket"
)

// ErrNoBrowser is returned by Start when no Chromium is installed.
var ErrNoBrowser = errors.New("chromium not found (Debian package chromium)")

// Find returns the path of Chromium or ErrNoBrowser.
func Find() (string, error) {
	for _, name := range []string{"chromium", "/usr/bin/chromium"} {
		if p, err := exec.LookPath(name); err == nil {
			return p, nil
		}
	}
	return "", ErrNoBrowser
}

// Browser is one running headless Chromium with one page.
type Browser struct {
	cmd  *exec.Cmd
	ws   *websocket.Conn
	mu   sync.Mutex
	next int
}

// Start runs Chromium with a fresh profile in profileDir and a window of
// width×height CSS pixels, and connects to its first page. It gives up
// after timeout.
func Start(profileDir string, width, height int, timeout time.Duration) (*Browser, error) {
	bin, err := Find()
	if err != nil {
		return nil, err
	}
	args := []string{
		"--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
		"--disable-background-networking", "--disable-component-update", "--disable-sync",
		"--user-data-dir=" + profileDir,
		"--remote-debugging-address=127.0.0.1", "--remote-debugging-port=0",
		fmt.Sprintf("--window-size=%d,%d", width, height), "about:blank",
	}
	cmd := exec.Command(bin, args...)
	cmd.SysProcAttr = &syscall.SysProcAttr{Setpgid: true}
	stderr, err := cmd.StderrPipe()
	if err != nil {
		return nil, err
	}
	if err := cmd.Start(); err != nil {
		return nil, err
	}
	b := &Browser{cmd: cmd}
	// Chromium prints "DevTools listening on ws://…" once it is up.
	found := make(chan string, 1)
	go func() {
		re := regexp.MustCompile(`DevTools listening on (ws://\S+)`)
		sc := bufio.NewScanner(stderr)
		for sc.Scan() {
			if m := re.FindStringSubmatch(sc.Text()); m != nil {
				select {
				case found <- m[1]:
				default:
				}
			}
		}
	}()
	var browserURL string
	select {
	case browserURL = <-found:
	case <-time.After(timeout):
		b.Close()
		return nil, fmt.Errorf("chromium did not start its DevTools endpoint within %v", timeout)
	}
	// The first page's endpoint: same host, /devtools/page/<id>, found
	// through the browser target.
	ws, _, err := websocket.DefaultDialer.Dial(browserURL, nil)
	if err != nil {
		b.Close()
		return nil, err
	}
	b.ws = ws
	var targets struct {
		TargetInfos []struct {
			TargetID string `json:"targetId"`
			Type     string `json:"type"`
		} `json:"targetInfos"`
	}
	if err := b.call("", "Target.getTargets", nil, &targets, timeout); err != nil {
		b.Close()
		return nil, err
	}
	page := ""
	for _, t := range targets.TargetInfos {
		if t.Type == "page" {
			page = t.TargetID
			break
		}
	}
	if page == "" {
		b.Close()
		return nil, errors.New("chromium has no page target")
	}
	ws.Close()
	pageURL := browserURL[:strings.Index(browserURL, "/devtools/")] + "/devtools/page/" + page
	if b.ws, _, err = websocket.DefaultDialer.Dial(pageURL, nil); err != nil {
		b.Close()
		return nil, err
	}
	return b, nil
}

// call sends one DevTools command and waits for its answer, skipping the
// events that arrive in between.
func (b *Browser) call(session, method string, params any, result any, timeout time.Duration) error {
	b.mu.Lock()
	defer b.mu.Unlock()
	b.next++
	id := b.next
	msg := map[string]any{"id": id, "method": method}
	if params != nil {
		msg["params"] = params
	}
	if session != "" {
		msg["sessionId"] = session
	}
	deadline := time.Now().Add(timeout)
	_ = b.ws.SetWriteDeadline(deadline)
	if err := b.ws.WriteJSON(msg); err != nil {
		return err
	}
	_ = b.ws.SetReadDeadline(deadline)
	for {
		var reply struct {
			ID     int             `json:"id"`
			Result json.RawMessage `json:"result"`
			Error  *struct {
				Message string `json:"message"`
			} `json:"error"`
		}
		if err := b.ws.ReadJSON(&reply); err != nil {
			return fmt.Errorf("%s: %w", method, err)
		}
		if reply.ID != id {
			continue
		}
		if reply.Error != nil {
			return fmt.Errorf("%s: %s", method, reply.Error.Message)
		}
		if result == nil {
			return nil
		}
		return json.Unmarshal(reply.Result, result)
	}
}

// Navigate opens url in the page and waits until the navigation is
// committed (the page's scripts then run on their own).
func (b *Browser) Navigate(url string, timeout time.Duration) error {
	var r struct {
		ErrorText string `json:"errorText"`
	}
	if err := b.call("", "Page.navigate", map[string]any{"url": url}, &r, timeout); err != nil {
		return err
	}
	if r.ErrorText != "" {
		return fmt.Errorf("navigate %s: %s", url, r.ErrorText)
	}
	return nil
}

// Eval evaluates a JavaScript expression in the page and decodes its value
// (which must be JSON-serialisable) into v.
func (b *Browser) Eval(expr string, v any, timeout time.Duration) error {
	var r struct {
		Result struct {
			Value json.RawMessage `json:"value"`
		} `json:"result"`
		Exception *struct {
			Text      string `json:"text"`
			Exception struct {
				Description string `json:"description"`
			} `json:"exception"`
		} `json:"exceptionDetails"`
	}
	if err := b.call("", "Runtime.evaluate", map[string]any{"expression": expr, "returnByValue": true}, &r, timeout); err != nil {
		return err
	}
	if r.Exception != nil {
		return fmt.Errorf("%s: %s %s", expr, r.Exception.Text, r.Exception.Exception.Description)
	}
	if v == nil {
		return nil
	}
	return json.Unmarshal(r.Result.Value, v)
}

// WaitFor evaluates expr (a boolean expression) every 50 ms until it is
// true or timeout passes. The wait counts evaluations against a deadline
// set by the caller; it is the bound of a test, not a measurement.
func (b *Browser) WaitFor(expr string, timeout time.Duration) error {
	ctx, cancel := context.WithTimeout(context.Background(), timeout)
	defer cancel()
	for {
		var ok bool
		err := b.Eval("Boolean("+expr+")", &ok, timeout)
		if err == nil && ok {
			return nil
		}
		select {
		case <-ctx.Done():
			if err != nil {
				return fmt.Errorf("waiting for %s: %w", expr, err)
			}
			return fmt.Errorf("%s still false after %v", expr, timeout)
		case <-time.After(50 * time.Millisecond):
		}
	}
}

// Screenshot returns a PNG of the page's viewport.
func (b *Browser) Screenshot(timeout time.Duration) ([]byte, error) {
	var r struct {
		Data string `json:"data"`
	}
	if err := b.call("", "Page.captureScreenshot", map[string]any{"format": "png"}, &r, timeout); err != nil {
		return nil, err
	}
	return base64.StdEncoding.DecodeString(r.Data)
}

// Close ends the browser and every helper process of its group.
func (b *Browser) Close() {
	if b.ws != nil {
		b.ws.Close()
	}
	if b.cmd != nil && b.cmd.Process != nil {
		_ = syscall.Kill(-b.cmd.Process.Pid, syscall.SIGKILL)
		_ = b.cmd.Wait()
	}
}

// Available reports whether a test should run with Chromium: true when it
// is installed; when it is not, required says whether that is a failure
// (GAITRIG_REQUIRE_TOOLS=1).
func Available() (ok, required bool) {
	_, err := Find()
	return err == nil, os.Getenv("GAITRIG_REQUIRE_TOOLS") == "1"
}
