// Package report turns a run folder into a self-contained HTML report with
// inline SVG plots (drawn with gonum/plot) and into JUnit XML for CI systems.
//
// The report is one file with no external links and no scripts: it can be
// mailed, archived next to the run folder and opened offline. Long telemetry
// is thinned for plotting with a min/max-preserving decimation so that spikes
// (a friction peak, a force dip) survive; the caption of each plot says how
// many samples were drawn out of how many recorded.
//
// Every time plot is marked with what happened: terrain segment
// boundaries, pushes, faults switching on and off, slip episodes and
// alarms, each found from the run folder itself (marks.go). Latency is
// shown as a distribution on log axes computed from the telemetry column,
// so one spike cannot flatten the rest.
//
// A passing simulation is not a safety certificate: every report says so at
// the top and defers treadmill and overground trials to the lab's own safety
// procedure, local rules and qualified staff.
package report
