package plant

import "math"

// Policy is a controller for the analysis tools: it sets the input from
// the state alone (a pure function, no memory), so the closed loop is an
// ordinary differential equation. nil means passive (zero input).
type Policy func(m *Model, s *State, in *Input)

// evalAt evaluates the right-hand side at (q, v) with the contact modes of
// s and the input of the policy (or none).
//
// A passive evaluation does not allocate: the input handed to a policy
// escapes (a Policy is an arbitrary function value), so only that path,
// in evalPolicy, pays for it.
func (m *Model) evalAt(s *State, q, v *[MaxDOF]float64, pol Policy, ev *eval) {
	m.evalGeom(s, q, v, pol, ev, true)
}

// evalGeom is evalAt; with freeGeom false the geometry of free feet is not
// computed (see rhsGeom): the inner stages of a step need only q̈.
func (m *Model) evalGeom(s *State, q, v *[MaxDOF]float64, pol Policy, ev *eval, freeGeom bool) {
	if pol != nil {
		m.evalPolicy(s, q, v, pol, ev, freeGeom)
		return
	}
	var in Input
	m.rhsGeom(s, q, v, &in, ev, freeGeom)
}

// evalPolicy is evalGeom with the input set by the policy.
func (m *Model) evalPolicy(s *State, q, v *[MaxDOF]float64, pol Policy, ev *eval, freeGeom bool) {
	var in Input
	tmp := *s
	tmp.Q, tmp.V = *q, *v
	pol(m, &tmp, &in)
	m.rhsGeom(s, q, v, &in, ev, freeGeom)
}

// Dormand–Prince 5(4) coefficients (Dormand and Prince 1980, J. Comput.
// Appl. Math. 6:19–26; as tabulated in Hairer, Nørsett, Wanner, Solving
// Ordinary Differential Equations I, 2nd ed., Table 5.2 — from memory,
// checked by the order test in dopri_test.go). The nodes c_i are not
// needed: the right-hand side does not depend on time (a Policy sees only
// the state).
var (
	dpA = [7][6]float64{
		{},
		{1.0 / 5},
		{3.0 / 40, 9.0 / 40},
		{44.0 / 45, -56.0 / 15, 32.0 / 9},
		{19372.0 / 6561, -25360.0 / 2187, 64448.0 / 6561, -212.0 / 729},
		{9017.0 / 3168, -355.0 / 33, 46732.0 / 5247, 49.0 / 176, -5103.0 / 18656},
		{35.0 / 384, 0, 500.0 / 1113, 125.0 / 192, -2187.0 / 6784, 11.0 / 84},
	}
	// dpE = b5 − b4: the embedded error estimate.
	dpE = [7]float64{71.0 / 57600, 0, -71.0 / 16695, 71.0 / 1920, -17253.0 / 339200, 22.0 / 525, -1.0 / 40}
)

// dopriStep takes one Dormand–Prince step of size h from x0 (k1 its
// evaluation). out receives the fifth-order solution, k7 the evaluation
// there (first same as last), and the return value is the scaled error
// norm (≤ 1: acceptable for rtol, atol), or +Inf if an evaluation failed.
func (m *Model) dopriStep(s *State, x0 *phase, k1 *eval, h float64, pol Policy, rtol, atol float64, out *phase, k7 *eval) float64 {
	n := m.n
	var kq, kv [7][MaxDOF]float64 // stage derivatives of q and v
	kq[0], kv[0] = x0.v, k1.acc
	var x phase
	var ev eval
	for st := 1; st < 7; st++ {
		for i := 0; i < n; i++ {
			dq, dv := 0.0, 0.0
			for j := 0; j < st; j++ {
				a := dpA[st][j]
				dq += a * kq[j][i]
				dv += a * kv[j][i]
			}
			x.q[i] = x0.q[i] + h*dq
			x.v[i] = x0.v[i] + h*dv
		}
		e := &ev
		if st == 6 {
			e = k7
		}
		m.evalGeom(s, &x.q, &x.v, pol, e, st == 6)
		if !e.ok {
			return math.Inf(1)
		}
		kq[st], kv[st] = x.v, e.acc
	}
	*out = x // stage 7 is evaluated at the fifth-order solution
	sum := 0.0
	for i := 0; i < n; i++ {
		eq, evv := 0.0, 0.0
		for j := 0; j < 7; j++ {
			eq += dpE[j] * kq[j][i]
			evv += dpE[j] * kv[j][i]
		}
		sq := atol + rtol*math.Max(math.Abs(x0.q[i]), math.Abs(x.q[i]))
		sv := atol + rtol*math.Max(math.Abs(x0.v[i]), math.Abs(x.v[i]))
		sum += (h*eq/sq)*(h*eq/sq) + (h*evv/sv)*(h*evv/sv)
	}
	return math.Sqrt(sum / float64(2*n))
}

// analysisStop says why an adaptive run ended.
type analysisStop int

const (
	stopTime  analysisStop = iota // reached the end time
	stopHeel                      // just after a heel strike
	stopEvent                     // a stopping event (fall, lift-off, …)
	stopFail                      // the integrator failed (non-finite, step too small)
)

// stepStats collects per-step quantities while integrating.
type stepStats struct {
	peakFriction float64 // max |F_t|/N over the stance foot
	minNormal    float64
	samples      int
	onSample     func(s *State, ev *eval) // optional observer of accepted steps
	scratch      *eval                    // the observer's copy, made once per run
}

func (st *stepStats) sample(m *Model, s *State, ev *eval) {
	for i := 0; i < m.nFeet; i++ {
		if s.Mode[i] == Free {
			continue
		}
		n, f := ev.force[i][1], ev.force[i][0]
		if st.samples == 0 || n < st.minNormal {
			st.minNormal = n
		}
		if n > 0 {
			st.peakFriction = math.Max(st.peakFriction, math.Abs(f)/n)
		} else if f != 0 {
			st.peakFriction = math.Inf(1)
		}
		st.samples++
	}
	if st.onSample != nil {
		// The observer gets a copy: what a function value is handed
		// escapes, and the integrator's own evaluation must not (a run
		// without an observer then does not allocate for it). One copy
		// serves every sample of the run.
		if st.scratch == nil {
			st.scratch = new(eval)
		}
		*st.scratch = *ev
		st.onSample(s, st.scratch)
	}
}

// analysisMethod is an embedded Runge–Kutta pair of the adaptive
// integrator.
type analysisMethod int

const (
	// methodDP8 is DOP853 (dop853.go), the analysis default: at the
	// tolerances of a gait search (1e-9 … 1e-11) it takes 0.45 to 0.6 of
	// the evaluations of the fifth-order pair (package doc, "Numerics").
	methodDP8 analysisMethod = iota
	// methodDP5 is Dormand–Prince 5(4), kept as an independent check of
	// the eighth-order results in the tests.
	methodDP5
)

// step takes one step of the method (see dopriStep and dop853Step); stg
// receives the stages of a DOP853 step.
func (a analysisMethod) step(m *Model, s *State, x0 *phase, k1 *eval, h float64, pol Policy, rtol, atol float64, out *phase, kLast *eval, stg *d8Stages) float64 {
	if a == methodDP5 {
		return m.dopriStep(s, x0, k1, h, pol, rtol, atol, out, kLast)
	}
	return m.dop853Step(s, x0, k1, h, pol, rtol, atol, out, kLast, stg)
}

// maxGrowth is the largest factor by which the step grows after an
// accepted step (10 for DOP853 as in its published code; 5 for the
// fifth-order pair, as this integrator always had).
func (a analysisMethod) maxGrowth() float64 {
	if a == methodDP5 {
		return 5
	}
	return 10
}

// exponent is −1/(q+1) for the order q of the method's error estimate.
func (a analysisMethod) exponent() float64 {
	if a == methodDP5 {
		return -0.2
	}
	return d8Exponent
}

// adaptive integrates s with the DOP853 method and event location until
// tEnd, or until just after the first heel strike when untilHeel is set.
// Every event is appended to events: an analysis run may hold more events
// than one TickResult, so each handled event's records are moved out of a
// scratch TickResult at once.
func (m *Model) adaptive(s *State, pol Policy, tEnd, rtol, atol float64, untilHeel bool, events *[]Event, st *stepStats) analysisStop {
	return m.adaptiveWith(methodDP8, s, pol, tEnd, rtol, atol, untilHeel, events, st)
}

// adaptiveWith is adaptive with the given method.
func (m *Model) adaptiveWith(meth analysisMethod, s *State, pol Policy, tEnd, rtol, atol float64, untilHeel bool, events *[]Event, st *stepStats) analysisStop {
	var r TickResult
	var cur, nxt eval
	// Analysis runs in the belt's frame: for a belt of constant speed that
	// is exact (Galilean invariance, tested in belt_test.go), and a Policy
	// sees only the state, so it cannot drive a belt profile.
	m.setBelt(s, nil)
	m.evalAt(s, &s.Q, &s.V, pol, &cur)
	if !cur.ok {
		return stopFail
	}
	if st != nil {
		st.sample(m, s, &cur)
	}
	h := 1e-3 * math.Sqrt(m.reach/m.p.Gravity)
	if meth == methodDP8 {
		h = m.initialStep(s, &cur, pol, rtol, atol, h)
	}
	var c0, c1 [numCond]float64
	var passive Input // the input of an event without a policy
	var stg, scratch d8Stages
	var dense d8Dense
	var located, xe phase // the state at an event located on real steps
	for s.T < tEnd {
		if h > tEnd-s.T {
			h = tEnd - s.T
		}
		x0 := phase{q: s.Q, v: s.V}
		var x1 phase
		errNorm := meth.step(m, s, &x0, &cur, h, pol, rtol, atol, &x1, &nxt, &stg)
		if !(errNorm <= 1) {
			fac := 0.2
			if finite(errNorm) {
				fac = math.Max(0.2, 0.9*math.Pow(errNorm, meth.exponent()))
			}
			h *= fac
			if h < 1e-14*math.Max(1, math.Abs(s.T)) {
				return stopFail
			}
			continue
		}
		m.conditions(s, &x0.q, 0, &cur, &c0)
		m.conditions(s, &x1.q, h, &nxt, &c1)
		first, tau := -1, h
		haveXe := false
		denseTried, denseOK := false, false
		for k := 0; k < numCond; k++ {
			if !triggered(k, c0[k], c1[k], s.fired&(1<<k) != 0) {
				continue
			}
			tk := 0.0
			if !latched(k) || c0[k] > 0 {
				var dn *d8Dense
				if meth == methodDP8 {
					if !denseTried {
						denseTried = true
						denseOK = m.dense853(s, &x0, &x1, h, pol, &stg, &dense)
					}
					if denseOK {
						dn = &dense
					}
				}
				var at bool
				tk, at = m.locateAdaptive(meth, s, &x0, &cur, pol, k, c0[k], c1[k], h, dn, &located)
				if first < 0 || tk < tau {
					haveXe = at
					if at {
						xe = located
					}
				}
			}
			if first < 0 || tk < tau {
				first, tau = k, tk
			}
		}
		hNext := h * math.Min(meth.maxGrowth(), math.Max(0.2, 0.9*math.Pow(math.Max(errNorm, 1e-10), meth.exponent())))
		if first < 0 {
			s.Q, s.V = x1.q, x1.v
			s.T += h
			cur = nxt
			for i := 0; i < m.nFeet; i++ {
				m.setRegion(s, i, &cur.geom[i])
			}
			for k := 0; k < numCond; k++ {
				if !(c1[k] <= 0) {
					s.fired &^= 1 << k
				}
			}
			if st != nil {
				st.sample(m, s, &cur)
			}
			h = hNext
			continue
		}
		if tau > 0 {
			if !haveXe {
				var ee eval
				meth.step(m, s, &x0, &cur, tau, pol, rtol, atol, &xe, &ee, &scratch)
			}
			s.Q, s.V = xe.q, xe.v
			s.T += tau
		}
		m.evalAt(s, &s.Q, &s.V, pol, &cur)
		if st != nil {
			st.sample(m, s, &cur)
		}
		in := &passive
		if pol != nil {
			// A separate variable: what a policy is handed escapes, and
			// the passive input must not.
			pin := new(Input)
			pol(m, s, pin)
			in = pin
		}
		// One handle call adds at most four events (scuff, two impact
		// slips, the impact), well within a TickResult.
		r = TickResult{}
		stop := m.handle(s, in, first, &cur, &r)
		added := r.Events[:r.NumEvents]
		*events = append(*events, added...)
		m.evalAt(s, &s.Q, &s.V, pol, &cur)
		if !cur.ok {
			return stopFail
		}
		if stop {
			return stopEvent
		}
		if untilHeel {
			for _, e := range added {
				if e.Kind == HeelStrike {
					return stopHeel
				}
			}
		}
		if st != nil {
			st.sample(m, s, &cur)
		}
		h = math.Max(hNext, 1e-9)
	}
	return stopTime
}

// locateWidth is the bracket, in seconds, to which the adaptive
// integrator locates an event.
const locateWidth = 1e-14

// locateAdaptive is locate for the adaptive step: the trial states are
// the method's solutions from x0, so the event time is as accurate as the
// integration. With the step's dense output dn (nil: none) the crossing is
// found on the interpolant first and then confirmed on real steps
// (locateDense); without it, or when that fails, every trial re-takes the
// step.
//
// When it reports at, out holds the state of the real step to the returned
// time (so the caller need not take it again).
func (m *Model) locateAdaptive(meth analysisMethod, s *State, x0 *phase, k1 *eval, pol Policy, k int, fa, fb, h float64, dn *d8Dense, out *phase) (t float64, at bool) {
	var ev eval
	var c [numCond]float64
	var stg d8Stages
	real := func(t float64) float64 {
		meth.step(m, s, x0, k1, t, pol, 1, 1, out, &ev, &stg)
		m.conditions(s, &out.q, t, &ev, &c)
		return c[k]
	}
	if dn != nil {
		if t, ok := m.locateDense(s, dn, pol, k, fa, fb, h, real); ok {
			// locateDense returns right after real(t), or h, which it
			// has not stepped to.
			return t, t < h
		}
	}
	return illinois(fa, fb, h, locateWidth, 1e-16, real), false
}

// initialStep chooses the first step of an adaptive DOP853 run from the
// size of the state and of its derivatives (the starting-step algorithm of
// Hairer, Nørsett & Wanner, Solving ODEs I, section II.4, as DOP853 and
// SciPy use it), at the cost of one evaluation. fallback is returned if
// that evaluation fails.
func (m *Model) initialStep(s *State, k1 *eval, pol Policy, rtol, atol, fallback float64) float64 {
	n := m.n
	norm := func(q, v *[MaxDOF]float64, ref *phase) float64 {
		sum := 0.0
		for i := 0; i < n; i++ {
			sq := q[i] / (atol + rtol*math.Abs(ref.q[i]))
			sv := v[i] / (atol + rtol*math.Abs(ref.v[i]))
			sum += sq*sq + sv*sv
		}
		return math.Sqrt(sum / float64(2*n))
	}
	x0 := phase{q: s.Q, v: s.V}
	d0 := norm(&x0.q, &x0.v, &x0)
	d1 := norm(&x0.v, &k1.acc, &x0)
	h0 := 1e-6
	if d0 >= 1e-5 && d1 >= 1e-5 {
		h0 = 0.01 * d0 / d1
	}
	var x1 phase
	for i := 0; i < n; i++ {
		x1.q[i] = x0.q[i] + h0*x0.v[i]
		x1.v[i] = x0.v[i] + h0*k1.acc[i]
	}
	var e eval
	m.evalGeom(s, &x1.q, &x1.v, pol, &e, false)
	if !e.ok {
		return fallback
	}
	var dq, dv [MaxDOF]float64
	for i := 0; i < n; i++ {
		dq[i], dv[i] = x1.v[i]-x0.v[i], e.acc[i]-k1.acc[i]
	}
	d2 := norm(&dq, &dv, &x0) / h0
	h1 := math.Max(1e-6, h0*1e-3)
	if d1 > 1e-15 || d2 > 1e-15 {
		h1 = math.Pow(0.01/math.Max(d1, d2), -d8Exponent)
	}
	h := math.Min(100*h0, h1)
	if !(h > 0) || !finite(h) {
		return fallback
	}
	return h
}

// locateDense locates the crossing of condition k on the dense output d of
// a step of size h, then moves onto the crossing of the real step (real(t)
// re-takes the step to length t and returns the condition there) by
// Newton steps with the slope of the interpolant, so the answer is the
// same as a search on real steps alone: a time within locateWidth after
// the crossing, where the condition is ≤ 0. Each trial on the interpolant
// costs one evaluation instead of a whole step; the real steps are
// usually two. It reports false (and the caller searches on real steps)
// when the slope is not usable or the Newton steps do not settle.
func (m *Model) locateDense(s *State, d *d8Dense, pol Policy, k int, fa, fb, h float64, real func(float64) float64) (float64, bool) {
	var x phase
	var ev eval
	var c [numCond]float64
	n := m.n
	cond := func(t float64) float64 {
		d.at(n, t/h, &x)
		m.evalAt(s, &x.q, &x.v, pol, &ev)
		m.conditions(s, &x.q, t, &ev, &c)
		return c[k]
	}
	t := illinois(fa, fb, h, locateWidth, 1e-16, cond)
	t1, t2 := math.Max(0, t-1e-6*h), math.Min(h, t+1e-6*h)
	slope := (cond(t2) - cond(t1)) / (t2 - t1)
	if !(slope < 0) || !finite(slope) {
		return 0, false
	}
	for it := 0; it < 6; it++ {
		f := real(t)
		if math.IsNaN(f) {
			return 0, false
		}
		ahead := f / -slope // time from t to the crossing (negative: behind)
		if f <= 0 && -ahead < locateWidth {
			return t, true
		}
		t += ahead + 0.5*locateWidth
		if t >= h {
			return h, true // the step's end is past the crossing (fb ≤ 0)
		}
		if !(t > 0) {
			return 0, false
		}
	}
	return 0, false
}
