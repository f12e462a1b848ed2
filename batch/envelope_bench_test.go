package batch

import (
	"context"
	"fmt"
	"testing"

	"gaitrig/scenarios"
)

// BenchmarkStability is `gaitrig stability level-demo` with the defaults
// (80 perturbed steps, the push and step-down runs of the gait
// sensitivity norm) against the built-in firmware in lockstep.
func BenchmarkStability(b *testing.B) {
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	for i := 0; i < b.N; i++ {
		if _, err := (Stability{Dir: b.TempDir()}).Run(context.Background(), sc); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkMargins is `gaitrig margins level-demo` at 2 % with the first
// 1, 4 and all axes (scenarios.MarginAxes order), one and two jobs: how
// the time scales with axes and cores.
func BenchmarkMargins(b *testing.B) {
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		b.Fatal(err)
	}
	for _, n := range []int{1, 4, len(scenarios.MarginAxes)} {
		for _, jobs := range []int{1, 2} {
			b.Run(fmt.Sprintf("axes=%d/jobs=%d", n, jobs), func(b *testing.B) {
				b.ReportAllocs()
				for i := 0; i < b.N; i++ {
					if _, err := (Margins{Dir: b.TempDir(), Jobs: jobs}).Search(context.Background(), sc, scenarios.MarginAxes[:n]); err != nil {
						b.Fatal(err)
					}
				}
			})
		}
	}
}
