package plant

import "math"

// tseg is one compiled terrain segment.
type tseg struct {
	p0, p1   [2]float64 // start and end points
	t, n     [2]float64 // unit tangent (forward) and normal (up)
	length   float64
	muS, muK float64
}

func compileTerrain(tr Terrain) []tseg {
	out := make([]tseg, len(tr.Segments))
	p := tr.Start
	for i, s := range tr.Segments {
		c, sn := math.Cos(s.Slope), math.Sin(s.Slope)
		q := [2]float64{p[0] + s.Length*c, p[1] + s.Length*sn}
		out[i] = tseg{p0: p, p1: q, t: [2]float64{c, sn}, n: [2]float64{-sn, c},
			length: s.Length, muS: s.MuStatic, muK: s.MuKinetic}
		p = q
	}
	return out
}

// surfacePoint is the terrain point closest to a query point.
type surfacePoint struct {
	seg     int
	p       [2]float64 // closest terrain point
	t, n    [2]float64 // tangent and normal at that point
	dist    float64    // signed distance from the terrain to the query point (negative below)
	clamped bool       // the closest point is a vertex between segments
}

// closestOnSegment computes the closest point of segment i to c. The first
// segment extends backward and the last forward without end.
func (m *Model) closestOnSegment(i int, c [2]float64, sp *surfacePoint) {
	s := &m.terrain[i]
	u := (c[0]-s.p0[0])*s.t[0] + (c[1]-s.p0[1])*s.t[1]
	side := (c[0]-s.p0[0])*s.n[0] + (c[1]-s.p0[1])*s.n[1]
	sp.seg, sp.t, sp.n, sp.clamped = i, s.t, s.n, false
	last := len(m.terrain) - 1
	switch {
	case u < 0 && i > 0:
		sp.p = s.p0
		sp.clamped = true
	case u > s.length && i < last:
		sp.p = s.p1
		sp.clamped = true
	default:
		sp.p = [2]float64{s.p0[0] + u*s.t[0], s.p0[1] + u*s.t[1]}
		sp.dist = side
		return
	}
	w := [2]float64{c[0] - sp.p[0], c[1] - sp.p[1]}
	d := math.Hypot(w[0], w[1])
	if d > 1e-300 {
		nn := [2]float64{w[0] / d, w[1] / d}
		if side < 0 {
			nn = [2]float64{-nn[0], -nn[1]}
			d = -d
		}
		sp.n = nn
		sp.t = [2]float64{nn[1], -nn[0]}
	}
	sp.dist = d
}

// closest finds the terrain point nearest to c, searching outward from the
// segment hint so that a long terrain costs no more than a short one.
func (m *Model) closest(c [2]float64, hint int, sp *surfacePoint) {
	last := len(m.terrain) - 1
	if hint < 0 || hint > last {
		hint = 0
	}
	m.closestOnSegment(hint, c, sp)
	var trial surfacePoint
	for dir := -1; dir <= 1; dir += 2 {
		for j := hint + dir; j >= 0 && j <= last; j += dir {
			m.closestOnSegment(j, c, &trial)
			if trial.dist < sp.dist-1e-15 || (trial.dist <= sp.dist && !trial.clamped && sp.clamped) {
				*sp = trial
				continue
			}
			// Stop once the clamped distance grows beyond the best found.
			if math.Abs(trial.dist) > math.Abs(sp.dist)+2*m.reach {
				break
			}
		}
	}
}

// heightAbove returns the signed distance of point c above the terrain.
func (m *Model) heightAbove(c [2]float64, hint int) float64 {
	var sp surfacePoint
	m.closest(c, hint, &sp)
	return sp.dist
}
