// Package plant is the physical model of a planar curved-foot biped: its
// parameters, kinematics, mass matrix and bias forces, rolling and sliding
// foot contacts with the exact ground reaction force, plastic heel-strike
// impacts, a fixed-step integrator for real-time ticks, an adaptive one for
// analysis, gait events, energy, and the step-to-step map with its gait
// finder.
//
// The walker is a general tree of rigid links hanging from a hip point mass
// (two legs, optionally a torso), described by floating-base coordinates
// q = (x_hip, y_hip, θ_1 … θ_n) with absolute link angles measured
// counter-clockwise from the world vertical. World x points forward, y up,
// gravity is −g ŷ. The equations of motion are
//
//	M(q) q̈ + h(q, q̇) = B τ + J_cᵀ λ (+ J_hipᵀ F_hip)
//
// where h holds the velocity-product and gravity terms and λ = (F_t, N) per
// foot in contact is the force of the ground on the foot in the tangent and
// normal directions of the terrain segment it touches.
//
// The package is pure computation: no I/O, no clocks, no logging, no
// goroutines. Model.Step does not allocate, so it can run inside a 1 kHz
// loop. A Model is read-only after New and may be shared between
// goroutines; each goroutine keeps its own State.
package plant
