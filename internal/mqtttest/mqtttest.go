// Package mqtttest is the one helper by which tests find a real Mosquitto
// broker: the one .ci/run started (GAITRIG_MOSQUITTO_ADDR), or one started
// for the test on a free loopback port with rig.StartMosquitto. Without
// Mosquitto the test is skipped, or fails when GAITRIG_REQUIRE_TOOLS=1 (as
// in CI, where a skipped broker test would pass unseen).
package mqtttest

import (
	"os"
	"testing"

	"gaitrig/rig"
)

// MosquittoAddr returns the HOST:PORT of a running Mosquitto on loopback;
// a broker it started is stopped when the test ends.
func MosquittoAddr(t testing.TB) string {
	t.Helper()
	if a := os.Getenv("GAITRIG_MOSQUITTO_ADDR"); a != "" {
		return a
	}
	addr, stop, err := rig.StartMosquitto()
	if err != nil {
		if os.Getenv("GAITRIG_REQUIRE_TOOLS") == "1" {
			t.Fatalf("Mosquitto is required (GAITRIG_REQUIRE_TOOLS=1): %v", err)
		}
		t.Skipf("no Mosquitto broker: %v (install the Debian package mosquitto)", err)
	}
	t.Cleanup(stop)
	return addr
}
