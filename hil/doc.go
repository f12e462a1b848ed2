// Package hil is the loop that runs a plant model against a controller
// link: it paces ticks (lockstep or wall-clock), sends the firmware what
// its sensors would read, applies the torques it sends back through an
// actuator model, watches what the firmware cannot see (ground forces,
// falls, the link itself), raises alarms by the scenario's policy, e-stops
// on a trip, and records every tick, step and event into a run folder.
//
// hil takes its Config, the plant model, the initial state and an open
// bridges.Conn as given: reading a scenario file, finding the natural gait
// and choosing a link are the job of package rig, which every command and
// scenario test goes through. hil owns the alarm vocabulary the loop acts
// on (alarm kinds, severities, pass criteria; alarmkinds.go), which
// scenario files name.
//
// # One tick
//
// Lockstep (virtual time, bit-identical logs): read the sensors from the
// plant state → send State(seq) → wait for the Command echoing seq
// (commands with another seq are stale: dropped and counted; an unanswered
// state is sent again after Config.Resend; no valid command for
// Config.Watchdog of the firmware's answer time trips the watchdog, the
// rig's own stalls and the host's CPU contention not counted) → check the command
// (bad torques rejected with zero torque applied; limits clip and raise
// torque_saturation) → step the plant one tick with the torque held
// (zero-order hold) → record.
//
// Wall-clock (paced by the real clock, the loop goroutine locked to its OS
// thread, SCHED_FIFO requested): wait for the tick's deadline (sleep with
// clock_nanosleep, spin the last 50 µs) → take the newest command the
// receiver goroutine has put in the mailbox (it answers an earlier state:
// a late command is applied at the next tick; no fresh command holds the
// last torque) → watchdog → send State(seq) → step → record. Round-trip
// latency (state sent → its command received), tick jitter (actual −
// scheduled start) and deadline misses (a tick's work ending after the next
// tick was due) go into fixed histograms.
//
// # The session
//
// Before the first tick the rig waits for the firmware's Greeting
// (Config.HandshakeTimeout), refuses a different protocol version
// (version_mismatch, a Stop naming both versions) or actuator count, and
// sends its Config. A greeting that comes later gets the Config again:
// before the first command the first one was lost; after it the firmware
// restarted, which raises firmware_fault. Every run ends with a Stop whose
// reason says why: end, e-stop, watchdog, aborted, firmware, bad version.
//
// # What a telemetry row holds
//
// Row k (record.Tick with Index k) holds the plant state at the END of
// tick k (T = (k+1)·dt from the start), the sensor readings the firmware
// was sent at its start, the command in force and the torque and push
// applied over it. So Replay steps from the manifest's initial state with
// row k's inputs and compares with row k. In lockstep the wall time and
// latency columns are 0 and NaN: they would make two runs' logs differ.
//
// # Alarms
//
// Every plant event that is not normal walking (heel strike, toe-off and
// re-sticking are) and every link event becomes an alarm of a kind listed
// in AlarmKinds (hil/alarmkinds.go), with the severity the scenario sets (warn or
// trip; defaults in DefaultSeverity). A warn kind that repeats is
// logged at most once per Config.AlarmInterval of simulated time; the
// summary counts every occurrence and the next line says how many were
// not logged. The first trip e-stops: torques to zero (or joint damping,
// Config.EStop), a Stop with the reason to the firmware, outcome tripped.
// The run ends at the tripping tick, or, with Config.EStopCoast, the plant
// runs on without the firmware so the record shows what the e-stop led to. Alarms go to the record's
// events.jsonl with tick, simulated time, wall time and the values that
// caused them, and to Config.Alarms (an AlarmSink such as the MQTT link's
// alarm topic) as JSON.
//
// # Faults
//
// Link faults (Config.LinkFaults) apply to any link, in the loop: added
// latency (fixed plus uniform random; in lockstep counted in whole ticks),
// dropped frames (states and commands) and corrupted commands (handled as
// the CRC check of a real link handles them: bad_frame). Sensor freezes
// (Config.Freezes) hold one sensor's last reading; pushes (Config.Pushes)
// add a hip force as an impulse over one tick or a force held for a while,
// at a time or at a heel strike. All randomness comes from math/rand/v2 PCG
// streams seeded by Config.Seed.
package hil
