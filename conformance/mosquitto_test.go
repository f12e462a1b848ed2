package conformance

import (
	"context"
	"os"
	"os/exec"
	"testing"
	"time"

	"gaitrig/firmware/reference"
	"gaitrig/rig"
)

// Over a real Mosquitto broker, with the reference firmware connected as a
// separate client (as `gaitrig firmware --link mqtt:URL` runs it), every
// check of the first session passes: damaged frames travel as MQTT
// payloads. The reference firmware ends its session on a stop (section 6
// item 5 lets it), so when the battery opens the link again nobody greets:
// the optional greeting check fails, and the refusal check is not run,
// which withholds a passing verdict. The test pins exactly that.
func TestReferenceFirmwareOverMosquitto(t *testing.T) {
	addr := os.Getenv("GAITRIG_MOSQUITTO_ADDR")
	if addr == "" {
		if _, err := exec.LookPath("mosquitto"); err != nil {
			if _, e := os.Stat("/usr/sbin/mosquitto"); e != nil {
				if os.Getenv("GAITRIG_REQUIRE_TOOLS") == "1" {
					t.Fatal("mosquitto is required (GAITRIG_REQUIRE_TOOLS=1) but not installed")
				}
				t.Skip("mosquitto not installed; set GAITRIG_REQUIRE_TOOLS=1 to make this a failure")
			}
		}
		a, stop, err := rig.StartMosquitto()
		if err != nil {
			t.Fatal(err)
		}
		t.Cleanup(stop)
		addr = a
	}
	link := "mqtt:tcp://" + addr
	rigID := "conformance-" + t.Name()
	served := make(chan error, 1)
	go func() {
		served <- rig.ServeFirmware(link, rigID, "", "", reference.Options{IdleTimeout: 20 * time.Second}, func(string) {})
	}()
	dial, err := LinkDialer(link, rigID)
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 2*time.Minute)
	defer cancel()
	rep, err := Run(ctx, link, dial, Options{Samples: testSamples, Log: func(l string) { t.Log(l) }})
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range rep.Checks {
		want := Pass
		switch c.Name {
		case CheckGreetsAgain:
			want = Fail
		case CheckRefusesBadConf:
			want = NotRun
		}
		if c.Status != want {
			t.Errorf("%s: %s (%s), want %s", c.Name, c.Status, c.Seen, want)
		}
	}
	if rep.Passed {
		t.Error("verdict pass with the refusal check not run")
	}
	checkPercentiles(t, rep)
	select {
	case err := <-served:
		if err != nil {
			t.Errorf("the firmware ended with %v, want a normal end on the battery's stop", err)
		}
	case <-time.After(10 * time.Second):
		t.Error("the firmware did not end within 10 s of the stop")
	}
}
