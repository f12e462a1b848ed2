// Package browsertest loads pages we write in headless Chromium for tests
// and reads back the DOM the browser built.
package browsertest

import (
	"bytes"
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"golang.org/x/net/html"
)

// DOM loads a file in headless Chromium and returns the DOM the
// browser built, skipping without the browser unless
// GAITRIG_REQUIRE_TOOLS=1. The browser runs in its own process group,
// killed when the time is up and after it exits, so no helper process
// outlives the test. (report's own helper, in its test files, also takes
// screenshots.)
func DOM(t testing.TB, path string) *html.Node {
	t.Helper()
	bin, err := exec.LookPath("chromium")
	if err != nil {
		if os.Getenv("GAITRIG_REQUIRE_TOOLS") == "1" {
			t.Fatal("chromium not found (Debian package chromium) and GAITRIG_REQUIRE_TOOLS=1")
		}
		t.Skip("chromium not found: install the Debian package chromium to run the browser check")
	}
	abs, err := filepath.Abs(path)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 90*time.Second)
	defer cancel()
	cmd := exec.CommandContext(ctx, bin, "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
		"--disable-background-networking", "--disable-component-update", "--disable-sync",
		"--user-data-dir="+t.TempDir(), "--dump-dom", "file://"+abs)
	cmd.SysProcAttr = &syscall.SysProcAttr{Setpgid: true}
	cmd.Cancel = func() error { return syscall.Kill(-cmd.Process.Pid, syscall.SIGKILL) }
	cmd.WaitDelay = 5 * time.Second
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	err = cmd.Run()
	if cmd.Process != nil {
		_ = syscall.Kill(-cmd.Process.Pid, syscall.SIGKILL)
	}
	if err != nil {
		t.Fatalf("chromium: %v; stderr: %s", err, errb.String())
	}
	doc, err := html.Parse(&out)
	if err != nil {
		t.Fatal(err)
	}
	return doc
}

// FindAll returns every element named tag below n, in document order.
func FindAll(n *html.Node, tag string) []*html.Node {
	var out []*html.Node
	if n.Type == html.ElementNode && n.Data == tag {
		out = append(out, n)
	}
	for c := n.FirstChild; c != nil; c = c.NextSibling {
		out = append(out, FindAll(c, tag)...)
	}
	return out
}

// Text returns the text below n.
func Text(n *html.Node) string {
	var b strings.Builder
	var walk func(*html.Node)
	walk = func(n *html.Node) {
		if n.Type == html.TextNode {
			b.WriteString(n.Data)
		}
		for c := n.FirstChild; c != nil; c = c.NextSibling {
			walk(c)
		}
	}
	walk(n)
	return b.String()
}

// Attr returns attribute key of n ("" when absent).
func Attr(n *html.Node, key string) string {
	for _, a := range n.Attr {
		if a.Key == key {
			return a.Val
		}
	}
	return ""
}
