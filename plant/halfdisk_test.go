package plant

import (
	"math"
	"testing"
)

// halfDiskParams is a uniform half-disk of radius 0.5 m and mass 2 kg
// rocking on its curved face, as a one-link configuration
// (Params.OneLeg): the arc centre is the "hip" (FootRadius = Length = R),
// the centre of mass 4R/(3π) below it, inertia about the centre of mass
// ½mR² − m(4R/3π)² (textbook rigid-body results, from memory), on level
// ground with friction coefficients muS and muK.
func halfDiskParams(muS, muK float64) Params {
	const R, mass = 0.5, 2.0
	d := 4 * R / (3 * math.Pi)
	return Params{OneLeg: true, Gravity: 9.81,
		Legs:    [2]Leg{{Length: R, Mass: mass, COMDist: d, Inertia: 0.5*mass*R*R - mass*d*d, FootRadius: R}},
		Terrain: Terrain{Start: [2]float64{-5, 0}, Segments: []Segment{{Length: 10, MuStatic: muS, MuKinetic: muK}}}}
}

// rockingHalfDisk is the smooth problem the integrator tests step: the
// half-disk of halfDiskParams (friction high enough that it never slips)
// tilted 0.6 rad and rocking at 1 rad/s, a large amplitude.
func rockingHalfDisk(t *testing.T) (*Model, State) {
	t.Helper()
	m, err := New(halfDiskParams(5, 5), Options{})
	if err != nil {
		t.Fatal(err)
	}
	s, err := m.Stand(0, 0, [2]float64{0.6, 0}, 0, 1)
	if err != nil {
		t.Fatal(err)
	}
	return m, s
}
