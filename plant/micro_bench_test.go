package plant

import "testing"

// Micro-benchmarks of the pieces of a tick, to see where the time goes.

// BenchmarkKKT5: one 5×5 saddle-point elimination (the general path).
func BenchmarkKKT5(b *testing.B) {
	var base kkt
	for i := 0; i < 5; i++ {
		for j := 0; j < 5; j++ {
			base.a[i][j] = float64((i*7+j*3)%5) + 0.1
		}
		base.a[i][i] += 10
		base.b[i] = float64(i)
	}
	b.ReportAllocs()
	for i := 0; i < b.N; i++ {
		s := base
		s.solve(5)
	}
}

// BenchmarkRHS: one right-hand-side evaluation with one foot rolling.
func BenchmarkRHS(b *testing.B) {
	m, s := benchWalker(b, false)
	var ev eval
	var in Input
	b.ReportAllocs()
	for i := 0; i < b.N; i++ {
		m.rhs(&s, &s.Q, &s.V, &in, &ev)
	}
}

// BenchmarkConditions: the event conditions at one state.
func BenchmarkConditions(b *testing.B) {
	m, s := benchWalker(b, false)
	var ev eval
	var in Input
	m.rhs(&s, &s.Q, &s.V, &in, &ev)
	var c [numCond]float64
	b.ReportAllocs()
	for i := 0; i < b.N; i++ {
		m.conditions(&s, &s.Q, 0, &ev, &c)
	}
}
