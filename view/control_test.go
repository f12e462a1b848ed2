package view_test

import (
	"context"
	"io"
	"path/filepath"
	"strings"
	"testing"

	"gaitrig/rig"
	"gaitrig/scenarios"
	"gaitrig/view"
)

// Any web page the viewer's browser has open can send a cross-site POST
// with a "simple" content type (text/plain, a form) and no preflight; the
// control endpoint takes only application/json, which such a page cannot
// send without the browser asking this server first.
func TestReplayControlWantsJSONContentType(t *testing.T) {
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "run")
	if _, err := rig.Run(context.Background(), sc, rig.Options{Link: "builtin", RunDir: dir, Duration: 0.2, MaxSteps: -1}); err != nil {
		t.Fatal(err)
	}
	rec, err := view.LoadRecording(dir)
	if err != nil {
		t.Fatal(err)
	}
	srv, err := view.New(view.Config{Setup: rec.Setup})
	if err != nil {
		t.Fatal(err)
	}
	defer srv.Close()
	srv.Play(rec)
	for _, ct := range []string{"text/plain", "application/x-www-form-urlencoded", ""} {
		resp, err := client.Post(srv.URL()+"control", ct, strings.NewReader(`{"pause": true}`))
		if err != nil {
			t.Fatal(err)
		}
		b, _ := io.ReadAll(io.LimitReader(resp.Body, 4096))
		resp.Body.Close()
		if resp.StatusCode != 415 || len(b) == 0 {
			t.Errorf("control with content type %q: status %d %q, want 415 with a reason", ct, resp.StatusCode, b)
		}
	}
	if code, text := post(t, srv.URL()+"control", `{"pause": false}`); code != 204 {
		t.Errorf("a JSON control request got %d %q", code, text)
	}
}
