package nonfinite

import (
	"encoding/json"
	"math"
	"testing"
)

// Every value written reads back as the same number (NaN as NaN), and a
// finite value is exactly what encoding/json writes for it.
func TestRoundTrip(t *testing.T) {
	for _, f := range []float64{0, -0.5, 1e-300, 123456.789, math.MaxFloat64, math.NaN(), math.Inf(1), math.Inf(-1)} {
		b := AppendJSON(nil, f, 64)
		got, err := ParseJSON(b, 64)
		if err != nil {
			t.Fatalf("%v: %s does not read back: %v", f, b, err)
		}
		if !(got == f || math.IsNaN(got) && math.IsNaN(f)) {
			t.Errorf("%v written as %s reads back as %v", f, b, got)
		}
		if Word(f) == "" {
			want, _ := json.Marshal(f)
			if string(b) != string(want) {
				t.Errorf("%v: %s, encoding/json writes %s", f, b, want)
			}
		} else if !json.Valid(b) {
			t.Errorf("%v: %s is not valid JSON", f, b)
		}
	}
	if got, _ := ParseJSON([]byte("null"), 64); !math.IsNaN(got) {
		t.Errorf("null reads as %v, want NaN", got)
	}
	if _, err := ParseJSON([]byte(`"fast"`), 64); err == nil {
		t.Error(`"fast" read as a number`)
	}
	if got := string(AppendJSON(nil, float64(float32(0.1)), 32)); got != "0.1" {
		t.Errorf("float32 0.1 written as %s, want 0.1", got)
	}
}

func TestAppendDoesNotAllocate(t *testing.T) {
	buf := make([]byte, 0, 64)
	if n := testing.AllocsPerRun(100, func() { buf = AppendJSON(buf[:0], math.Inf(-1), 64) }); n != 0 {
		t.Errorf("%v allocations", n)
	}
}
