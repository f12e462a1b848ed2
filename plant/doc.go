// Package plant is the physical model of a planar curved-foot biped: its
// parameters, kinematics, mass matrix and bias forces, rolling and sliding
// foot contacts with the exact ground reaction force, plastic heel-strike
// impacts, a fixed-step integrator for real-time ticks, an adaptive one for
// analysis, gait events, energy, and the step-to-step map with its gait
// finder.
//
// # Model
//
// The walker is a tree of rigid links hanging from a hip point mass (two
// legs, optionally a torso; Params.OneLeg keeps a single rolling body),
// described by floating-base coordinates q = (x_hip, y_hip, θ_1 … θ_n) with
// absolute link angles measured counter-clockwise from the world vertical.
// World x points forward, y up, gravity is −g ŷ. A leg's axis is
// a(θ) = (sin θ, −cos θ) from the hip to the foot; its foot is a circular
// arc of radius R whose centre sits at hip + (L − R)·a(θ) + d·a⊥(θ). The
// equations of motion are
//
//	M(q) q̈ + h(q, q̇) = B τ + J_cᵀ λ (+ J_hipᵀ F_hip)
//
// where h holds the velocity-product and gravity terms and λ = (F_t, N) per
// foot in contact is the force of the ground on the foot along the tangent
// and normal of the terrain it touches. A rolling foot's material point at
// the contact has zero velocity (two constraint rows); a sliding foot keeps
// only the normal row and feels Coulomb friction −μ_k N sign(v_slip).
//
// # Knees: the walker as a tree
//
// A leg with a Leg.Shank is a thigh from the hip to the knee and a shank
// from the knee to the foot; the foot arc is fixed to the shank, its centre
// at knee + (L_s − R)·a(θ_s) + d·a⊥(θ_s) with knee = hip + ℓ·a(θ_thigh).
// The shank angles are appended to q after the legs and the torso, so a
// walker without knees keeps its layout. Every body's position is the hip
// plus a sum of link vectors r·a(θ_k) along its path from the hip, so its
// velocity is v_hip + Σ r·a⊥(θ_k) θ̇_k, and the kinetic energy gives the mass
// matrix in closed form from composite moments (a composite-body
// formulation of this small tree):
//
//	M_hip,hip = m_total·I,   M_hip,k = S_k a⊥(θ_k),   M_kk = P_k,
//	M_thigh,shank = m_s ρ_s ℓ cos(θ_thigh − θ_shank)
//
// where S_k and P_k are the first and second moments about link k's
// proximal joint of link k and everything hanging from it (for a thigh:
// m_t ρ_t + m_s ℓ and m_t ρ_t² + I_t + m_s ℓ²; for other links their own
// m ρ and m ρ² + I). Lagrange's equations then give the bias
//
//	h_hip = −Σ_k S_k a(θ_k) θ̇_k² + m_total g ŷ,
//	h_k   = S_k g sin θ_k + Σ_j P_kj sin(θ_k − θ_j) θ̇_j²
//
// with P_kj the thigh–shank coefficient above (zero for links not
// joined). A straight leg and the torso are the special case without a
// child, so M keeps the arrow shape there. The foot's contact Jacobian
// gains the thigh column ℓ (t, n)·a⊥(θ_thigh); its rolling term R θ̇ belongs
// to the shank. A knee actuator applies +τ to the shank and −τ to the thigh
// (the knee angle is θ_shank − θ_thigh, zero straight, negative flexed). A
// locked knee (State.KneeLocked) is one more constraint row, θ̈_shank −
// θ̈_thigh = 0, solved with the contact rows; its force is the knee's lock
// torque (FootContact.KneeTorque, positive while the stop pushes).
//
// The knee stop is unilateral. A locked knee whose lock torque would turn
// negative (the stop would have to pull) unlocks: a knee_buckle event when
// its foot is on the ground and it has no latch, knee_unlock otherwise. An
// unlocked knee reaching its stop (θ_shank − θ_thigh = Shank.StopAngle, 0
// by default: the straight leg) is a knee strike: a plastic
// impulse locks it, solved together with no-slip impulses at the feet in
// contact (a foot that would need a pulling impulse is released). A
// Shank.Latch engages at a knee strike and at the leg's heel strike (when
// the knee is at its stop then) and releases when the foot leaves the
// ground, or earlier when the controller asks (ReleaseKneeLatch, between
// ticks); a latched knee carries torque of either sign. At a heel strike
// every locked knee is held through the impulse — the trailing leg's too,
// as published kneed passive gaits assume — and the trailing knee's latch
// releases as its foot leaves the ground, after which its stop alone holds
// it. The checks are a SymPy derivation of the tree by Lagrange's
// equations (kneed_test.go), the compass walker reproduced by the kneed
// walker with both knees latched (kneelock_test.go), and the conservation
// of angular momentum and energy at and between knee strikes
// (kneestrike_test.go).
//
// # Numerics
//
// Each evaluation solves the saddle-point system for q̈ and λ together:
// links without contact are eliminated through the arrow shape of M, one
// rolling foot has a closed form, anything else is a small Gaussian
// elimination with row equilibration and partial pivoting. A kneed walker
// takes the same elimination over groups of links (solveTree): a leg's
// thigh and shank couple with each other and, like every link, with the
// hip only, and a locked knee makes its leg one rigid body. This stays
// accurate for the nearly massless legs of the simplest walking model,
// where the Schur complement J M⁻¹ Jᵀ would lose digits in proportion to
// the mass ratio.
//
// Model.Step advances one control tick with Options.SubSteps classical RK4
// sub-steps (default 1: one 1 ms step at a 1 kHz tick) and the input held
// constant. Contact events are
// functions of the state that change sign; a sign change inside a sub-step
// is located by regula falsi (Illinois) on the sub-step length, to 1e-12 s,
// and handled at its time: heel strike (a plastic, no-slip impulse, the
// foot that would need a pulling impulse released, an impulse outside the
// friction cone resolved on its boundary), lift-off, friction limit,
// re-sticking, scuff, fall, and crossing from one terrain region to the next
// (segment line, convex vertex, or an impact at a concave corner). After
// each tick the state is projected back onto the contact constraints. Step
// does not allocate.
//
// The default of one sub-step is set by the accuracy budget, measured
// (these are the numbers that moved it from 4 to 1, substeps_test.go and
// the logs of the energy tests): after 2 s of passive stance the compass
// walker and the walker with a torso differ from a 64-sub-step integration
// by 2e-11 in every coordinate and rate, no more than with 4 sub-steps (the
// rounding and the per-tick projection set that floor, not the
// integrator); a kneed walker's free knee swing differs by 1e-10 after
// 0.2 s (3e-13 with 4); the energy drift of 10 s of passive stance is 8e-13
// of the largest kinetic energy (2e-14 with 4; the check allows 1e-9), on a
// belt 2e-12, of a free knee swing 9e-12. Events are located by
// re-integrating the sub-step from its start, so their times do not depend
// on the sub-step length. The plant's natural frequencies are a few hertz
// (ω h ≈ 0.02 for a 1 ms step, far inside RK4's stability limit 2.8) and a
// controller's torque is held over the tick, so its gains do not enter the
// step. A lockstep run of a passive scenario changes in the 12th digit; a
// controlled walk changes in the 5th or 6th, which is the sensitivity of
// the closed loop (2 sub-steps move it as much), not integration error.
// Options.SubSteps still buys more where a model needs it.
//
// StepMap, FindGait and MapJacobian use the adaptive eighth-order
// Dormand–Prince method DOP853 (embedded fifth- and third-order error
// estimates, coefficients from Hairer, Nørsett & Wanner as SciPy tabulates
// them; dop853.go) with the same right-hand side and event handling. An
// event is located on the step's dense output (DOP853's seventh-order
// continuous extension) and then settled on the real step's crossing by
// Newton steps, so the located time is that of the integration itself,
// within 1e-14 s. Ten passive steps of the SciPy fixture take 2501
// evaluations at a tolerance of 1e-9 and 3756 at 1e-11, against 4040 and
// 8396 with the Dormand–Prince 5(4) pair it replaced (kept in dopri.go as
// an independent check in the tests) and 1807 for SciPy's DOP853 at 1e-9.
// Stance extremes (peak friction, least normal force) are still sampled
// at the accepted steps and the events. The map
// Jacobian comes from the variational equations with the event-time
// (saltation) correction at the heel strike. A kneed walker's map passes
// through the trailing knee's release and the swing knee's strike; its
// section has both knees locked straight, and its Jacobian is taken by
// central differences of the whole map (kneedgait.go derives the choice;
// kneedgait_test.go checks the gait against an independent SciPy
// computation).
//
// # Moving ground
//
// A terrain segment may be a treadmill belt (Segment.Belt) whose surface
// runs along itself with the speed the loop gives for each tick
// (Input.Belt, a BeltMotion; BeltProfile computes it from a profile). A
// rolling foot keeps the belt's velocity, a sliding foot's friction
// opposes the slip relative to the belt, and a heel strike is plastic and
// no-slip relative to the belt. The derivation is at the top of belt.go;
// the checks are Galilean invariance, d'Alembert's principle and energy
// conservation relative to the belt (belt_test.go).
//
// The package is pure computation: no I/O, no clocks, no logging, no
// goroutines. A Model is read-only after New and may be shared between
// goroutines; each goroutine keeps its own State.
//
// A passing simulation is not a certificate of safety: treadmill and
// overground trials of real hardware need the lab's own safety procedure,
// local rules and qualified staff.
package plant
