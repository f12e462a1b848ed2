package conformance

import (
	"gaitrig/internal/mqtttest"
	"sync"
	"testing"
	"time"

	"gaitrig/firmware/reference"
	"gaitrig/rig"
)

// Over a real Mosquitto broker, with the reference firmware connected as a
// separate client for the whole battery (as `gaitrig firmware --link
// mqtt:URL` runs it), every check passes: damaged frames travel as MQTT
// payloads, and after the battery's stop the firmware greets again, so the
// battery's second rig client (its restart) is greeted and configured. The
// firmware must see exactly two sessions: the battery's normal end, then its
// own refusal of the bad config.
func TestReferenceFirmwareOverMosquitto(t *testing.T) {
	addr := mqtttest.MosquittoAddr(t)
	link := "mqtt:tcp://" + addr
	rigID := "conformance-" + t.Name()
	var mu sync.Mutex
	var sessions []error
	o := reference.Options{IdleTimeout: 3 * time.Second, GreetAgain: true, SessionEnded: func(err error) {
		mu.Lock()
		sessions = append(sessions, err)
		mu.Unlock()
	}}
	served := make(chan error, 1)
	go func() {
		served <- rig.ServeFirmware(link, rigID, "", "", o, func(string) {})
	}()
	dial, err := LinkDialer(link, rigID)
	if err != nil {
		t.Fatal(err)
	}
	rep, attempts := runUntilJudged(t, link, dial)
	for _, c := range rep.Checks {
		if c.Status != Pass {
			t.Errorf("%s: %s (%s), want pass", c.Name, c.Status, c.Seen)
		}
	}
	if !rep.Passed {
		t.Errorf("verdict fail, failed %v", rep.Failed())
	}
	checkPercentiles(t, rep)
	// The firmware ends by itself once no rig has spoken for its idle
	// timeout after the battery: a normal end, since it served sessions.
	select {
	case err := <-served:
		if err != nil {
			t.Errorf("the firmware ended with %v, want a normal end after its sessions", err)
		}
	case <-time.After(20 * time.Second):
		t.Fatal("the firmware did not end within 20 s of the battery")
	}
	mu.Lock()
	defer mu.Unlock()
	// Each attempt the host spoiled ended one session with the battery's
	// stop (abandonForHost) before the two of the attempt that counted.
	if n := len(sessions); n != 2+attempts-1 || sessions[n-2] != nil || sessions[n-1] == nil {
		t.Errorf("sessions ended with %v after %d attempts; want a normal end, then the refusal of the bad config, last", sessions, attempts)
	}
}
