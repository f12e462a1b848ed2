// Package view serves the live view of a run: one page, embedded in the
// binary, that draws the walker on its terrain with the ground reaction
// force of each foot inside its friction cone, strip charts of friction
// utilization, normal force, joint angles and torques, latency and jitter,
// the step table and the alarms, while the run goes or while a recorded
// run is played back.
//
// The page gets its data as Server-Sent Events: the stream goes one way,
// from the rig to the browser, which is all SSE does; it needs nothing
// beyond net/http on our side and EventSource in the browser, and the
// browser reconnects by itself. The few controls of a replay (pause,
// speed, seek) are plain POST requests.
//
// A live run feeds the server through a hil.Tap (snapshots, read by a
// goroutine of the server, never waited for by the loop), the run's step
// callback (a lock-free ring) and its alarm sink. Each viewer has a
// bounded queue; a viewer whose queue is full misses frames, which are
// counted and shown on its page, and never slows the others or the loop.
package view
