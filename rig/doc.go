// Package rig is the application layer of gaitrig: it takes one scenario
// plus the overrides a person or a batch asks for (link, clock, run length,
// output folder) to a prepared run and runs it. Preparing a run means
// building the loop configuration and the plant model from the scenario,
// finding the initial state (the natural gait when the scenario asks for
// it), dialling the controller link through the registry of link kinds,
// and creating the run folder with its manifest. Running it hands all of
// that to hil.Run and then writes what was asked for on top of the record
// (Parquet export, HTML report, JUnit XML).
//
// The package exists so that there is one pipeline from a scenario to a run:
// the command line, the batch package (suites, baselines, preflight), the
// end-to-end tests and the library tests all go through Prepare or Run, and
// none of them rebuilds the pipeline by hand. hil stays the loop (it knows
// nothing of scenario files or link syntax); plant stays pure.
//
// Errors that come from the user's configuration (a scenario that does not
// build, a --link that does not parse, a port that cannot be opened) wrap
// ErrConfig, so a command can tell them from failures of the run itself.
package rig
