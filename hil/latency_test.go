package hil

import (
	"context"

	"gaitrig/bridges"
	"gaitrig/bridges/inproc"
)

// MeasureLatencyInproc is MeasureLatency against the reference firmware in
// this process over the in-process link, for the tests and benchmarks of
// this package. It lives in a test file so that the package itself does
// not import bridges/inproc (the loop takes any bridges.Conn; choosing a
// link is the rig's job). serve is the firmware's runner.
func MeasureLatencyInproc(ctx context.Context, ticks int, hz float64, serve func(bridges.Conn) error) (LatencyReport, error) {
	rig, fw := inproc.Pair()
	defer rig.Close()
	done := make(chan error, 1)
	go func() { done <- serve(fw) }()
	rep, err := MeasureLatency(ctx, rig, "in-process link", ticks, hz)
	rig.Close()
	<-done
	return rep, err
}
