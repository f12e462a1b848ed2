package plant

import "math"

// tseg is one compiled terrain segment.
type tseg struct {
	p0, p1   [2]float64 // start and end points
	t, n     [2]float64 // unit tangent (forward) and normal (up)
	length   float64
	muS, muK float64
	belt     bool // the surface moves along t with the belt's speed
}

func compileTerrain(tr Terrain) []tseg {
	out := make([]tseg, len(tr.Segments))
	p := tr.Start
	for i, s := range tr.Segments {
		c, sn := math.Cos(s.Slope), math.Sin(s.Slope)
		q := [2]float64{p[0] + s.Length*c, p[1] + s.Length*sn}
		out[i] = tseg{p0: p, p1: q, t: [2]float64{c, sn}, n: [2]float64{-sn, c},
			length: s.Length, muS: s.MuStatic, muK: s.MuKinetic, belt: s.Belt}
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
			// Compare unsigned distances: the sign of a clamped (vertex)
			// distance comes from that segment's own line, which says
			// nothing about points far from it; a distant downhill segment
			// whose line passes above the query point would otherwise win
			// with a large negative distance.
			if a, b := math.Abs(trial.dist), math.Abs(sp.dist); a < b-1e-15 || (a <= b && !trial.clamped && sp.clamped) {
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

// setRegion records the terrain region of foot i's contact: the inside of
// a segment, or the vertex at the end of one.
// When a rolling foot changes region its rolling anchor is taken afresh,
// since the anchor is measured along the region's tangent.
func (m *Model) setRegion(s *State, i int, g *footGeom) {
	seg, vertex := m.regionOf(g)
	if seg == s.Seg[i] && vertex == s.vertex[i] {
		return
	}
	s.Seg[i], s.vertex[i] = seg, vertex
	if s.Mode[i] == Rolling {
		m.setAnchor(s, i, g)
	}
}

// regionOf returns the region of a contact: the segment, and whether the
// contact is the vertex at that segment's end.
func (m *Model) regionOf(g *footGeom) (seg int, vertex bool) {
	seg = g.sp.seg
	if g.sp.clamped {
		if g.sp.p == m.terrain[seg].p0 && seg > 0 {
			seg--
		}
		return seg, true
	}
	return seg, false
}

// surfaceInRegion is the contact point of a foot in a fixed terrain region:
// the line of segment j (not clamped to its ends), or the vertex at the end
// of segment j with the normal pointing from the vertex to c.
func (m *Model) surfaceInRegion(c [2]float64, j int, vertex bool, sp *surfacePoint) {
	sg := &m.terrain[j]
	sp.seg = j
	if !vertex || j == len(m.terrain)-1 {
		u := (c[0]-sg.p0[0])*sg.t[0] + (c[1]-sg.p0[1])*sg.t[1]
		sp.p = [2]float64{sg.p0[0] + u*sg.t[0], sg.p0[1] + u*sg.t[1]}
		sp.t, sp.n, sp.clamped = sg.t, sg.n, false
		sp.dist = (c[0]-sg.p0[0])*sg.n[0] + (c[1]-sg.p0[1])*sg.n[1]
		return
	}
	sp.p, sp.clamped = sg.p1, true
	w := [2]float64{c[0] - sg.p1[0], c[1] - sg.p1[1]}
	d := math.Hypot(w[0], w[1])
	sp.t, sp.n = sg.t, sg.n
	if d > 1e-300 {
		sp.n = [2]float64{w[0] / d, w[1] / d}
		sp.t = [2]float64{sp.n[1], -sp.n[0]}
	}
	sp.dist = d
}

// What happens when a contact leaves its terrain region across an edge.
const (
	edgeNone       = iota
	edgeToVertex   // onto the convex vertex at a segment end
	edgeToInterior // onto the inside of a segment (from a vertex, or across a straight joint)
	edgeImpact     // the foot meets the next segment at a concave corner: an impact
)

// regionEdges returns, for the backward (0) and forward (1) edge of foot
// i's region, how far the foot is from it (positive inside), what crossing
// it means, and the region on the other side.
func (m *Model) regionEdges(s *State, i int, c [2]float64) (val [2]float64, kind [2]int, seg [2]int, vertex [2]bool) {
	j := s.Seg[i]
	last := len(m.terrain) - 1
	val = [2]float64{math.NaN(), math.NaN()}
	along := func(k int) float64 {
		sg := &m.terrain[k]
		return (c[0]-sg.p0[0])*sg.t[0] + (c[1]-sg.p0[1])*sg.t[1]
	}
	above := func(k int) float64 {
		sg := &m.terrain[k]
		return (c[0]-sg.p0[0])*sg.n[0] + (c[1]-sg.p0[1])*sg.n[1] - m.feet[i].radius
	}
	// turn is sin of the slope change at the vertex after segment a:
	// negative convex, positive concave.
	turn := func(a int) float64 {
		ta, tb := m.terrain[a].t, m.terrain[a+1].t
		return ta[0]*tb[1] - ta[1]*tb[0]
	}
	const straight = 1e-12
	if s.vertex[i] && j < last {
		val[0], kind[0], seg[0] = along(j)-m.terrain[j].length, edgeToInterior, j
		val[1], kind[1], seg[1] = -along(j+1), edgeToInterior, j+1
		return
	}
	if j > 0 {
		switch tr := turn(j - 1); {
		case tr < -straight:
			val[0], kind[0], seg[0], vertex[0] = along(j), edgeToVertex, j-1, true
		case tr <= straight:
			val[0], kind[0], seg[0] = along(j), edgeToInterior, j-1
		default:
			val[0], kind[0], seg[0] = above(j-1), edgeImpact, j-1
		}
	}
	if j < last {
		switch tr := turn(j); {
		case tr < -straight:
			val[1], kind[1], seg[1], vertex[1] = m.terrain[j].length-along(j), edgeToVertex, j, true
		case tr <= straight:
			val[1], kind[1], seg[1] = m.terrain[j].length-along(j), edgeToInterior, j+1
		default:
			val[1], kind[1], seg[1] = above(j+1), edgeImpact, j+1
		}
	}
	return
}
