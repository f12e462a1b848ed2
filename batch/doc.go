// Package batch runs many scenarios: a suite of scenario files compared
// with a baseline, the pre-trial preflight battery, variants of one
// scenario, sharding of a scenario list across machines, and a scheduler
// that runs several lockstep runs at once and gives their results back in
// the order they were asked for.
//
// Every run goes through rig.Run (the one pipeline from a scenario to a
// run); batch decides only which runs to make, with which scenario, in
// which order, and what their results mean together. The command line
// (gaitrig suite, gaitrig preflight) keeps flags, printing and exit codes.
//
// Variants are derived in Go on the typed scenario (Derive: a deep copy,
// then a change of fields), never by writing the scenario to YAML and
// reading it back, so a value the scenario gives explicitly, a zero
// included, is the value the variant runs with.
//
// A passing batch, like a passing run, is not a safety certificate:
// treadmill and overground trials follow the lab's own safety procedure,
// local rules and qualified staff (see record.Caution).
package batch
