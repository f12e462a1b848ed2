package compare_test

import (
	"bytes"
	"context"
	"fmt"
	"gaitrig/internal/mqtttest"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gaitrig/compare"
	"gaitrig/internal/retrytest"
	"gaitrig/record"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// runOver records a 2 s lockstep run of level-demo over the link of o.
func runOver(t *testing.T, o rig.Options, name string) string {
	t.Helper()
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	o.Duration, o.MaxSteps = 2, -1
	// A lockstep run the host starved ends invalid (host_stall), not
	// tripped: run it again as a nightly rig would, at most a few times.
	return retrytest.UntilValid(t, "run over "+o.Link, func(n int) (string, record.Summary) {
		o.RunDir = filepath.Join(t.TempDir(), fmt.Sprintf("%s-%d", name, n))
		res, err := rig.Run(context.Background(), sc, o)
		if err != nil {
			t.Fatal(err)
		}
		return o.RunDir, res.Summary
	})
}

// TestCompareRunsOverMQTT compares lockstep runs whose firmware sat on the
// other side of an MQTT broker: two over the embedded broker, one in-process
// with one over the embedded broker, then one over the embedded broker with
// one over a real Mosquitto. Lockstep makes the
// plant's trajectory a function of the scenario and the firmware alone, so
// each pair starts alike, agrees on every tick and is within tolerances,
// and the page names both firmware greetings.
func TestCompareRunsOverMQTT(t *testing.T) {
	a := runOver(t, rig.Options{Link: "embedded", Rig: "cmp-a"}, "embedded-a")
	t.Run("embedded twice", func(t *testing.T) {
		sameRuns(t, a, runOver(t, rig.Options{Link: "embedded", Rig: "cmp-b"}, "embedded-b"))
	})
	// The link is not part of the trajectory: the in-process firmware gives
	// the same run as the same firmware over MQTT.
	t.Run("builtin and embedded", func(t *testing.T) {
		sameRuns(t, runOver(t, rig.Options{Link: "builtin"}, "builtin"), a)
	})
	t.Run("embedded and Mosquitto", func(t *testing.T) {
		addr := mqtttest.MosquittoAddr(t)
		sameRuns(t, a, runOver(t, rig.Options{Link: "mqtt:tcp://" + addr, LocalFirmware: true, Rig: fmt.Sprintf("cmp-m-%d", os.Getpid())}, "mosquitto"))
	})
}

// sameRuns checks that compare finds run folders a and b alike in every way.
func sameRuns(t *testing.T, a, b string) {
	t.Helper()
	r, err := compare.Runs(a, b)
	if err != nil {
		t.Fatal(err)
	}
	if !r.Within || !r.SameStart || r.Divergence != nil || r.ComparedTicks != 2000 || len(r.ScenarioDiffs) != 0 {
		t.Errorf("within %v (%q), same start %v, divergence %+v, %d ticks compared, %d scenario diffs",
			r.Within, r.Regressions, r.SameStart, r.Divergence, r.ComparedTicks, len(r.ScenarioDiffs))
	}
	if len(r.Steps) == 0 {
		t.Error("no steps paired")
	}
	for _, s := range r.Steps {
		if s.Diff == nil || *s.Diff != (compare.StepDiff{}) {
			t.Errorf("step %d differs: %+v", s.Index, s.Diff)
		}
	}
	var page bytes.Buffer
	if err := r.WriteHTML(&page); err != nil {
		t.Fatal(err)
	}
	if n := strings.Count(page.String(), "gaitrig-reference"); r.A.Greeting.Name != "gaitrig-reference" || r.B.Greeting.Name != "gaitrig-reference" || n < 2 {
		t.Errorf("greetings %q and %q; the page names the reference firmware %d times", r.A.Greeting.Name, r.B.Greeting.Name, n)
	}
}
