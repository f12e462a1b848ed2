package report

import (
	"os"
	"testing"
)

func TestQuickRender(t *testing.T) {
	r := makeSynthRun(synthOpts{durationS: 8, hz: 1000, patchMu: 0.15})
	v := viewOf(&r.m, &sliceTicks{ticks: r.ticks}, r.steps, r.events, &r.sum)
	f, err := os.Create("/tmp/report_quick.html")
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	if err := renderView(f, v, defaultMaxPoints); err != nil {
		t.Fatal(err)
	}
}
