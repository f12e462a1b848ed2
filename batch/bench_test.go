package batch

import (
	"testing"

	"gaitrig/scenarios"
)

// BenchmarkDerive measures one preflight variant of the demo: the deep
// copy, the change, and writing and checking its recorded text (which
// loads the text back once or twice).
func BenchmarkDerive(b *testing.B) {
	base, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		b.Fatal(err)
	}
	c := Battery()[1]
	b.ReportAllocs()
	for b.Loop() {
		if _, err := Derive(base, "level-demo-half-friction", c.What, c.Change); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkCopy measures the deep copy alone.
func BenchmarkCopy(b *testing.B) {
	base, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	for b.Loop() {
		_ = Copy(base)
	}
}
