package batch

import (
	"context"
	"math"
	"math/cmplx"
	"testing"

	"gonum.org/v1/gonum/mat"

	"gaitrig/record"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// stabilityTolerance is the agreement asked of the estimated eigenvalues
// with the exact ones of `cycle` (variational equations), in absolute
// value of each eigenvalue ranked by modulus.
const stabilityTolerance = 0.02

func TestStabilityAgreesWithCycle(t *testing.T) {
	if testing.Short() {
		t.Skip("runs two lockstep walks of about 45 steps each")
	}
	for _, name := range []string{"passive-downhill", "level-demo"} {
		t.Run(name, func(t *testing.T) {
			sc, err := scenarios.LoadBuiltin(name)
			if err != nil {
				t.Fatal(err)
			}
			exact, err := rig.AnalyseGait(sc)
			if err != nil || !exact.Found {
				t.Fatalf("cycle: %v", err)
			}
			rep, err := Stability{Dir: t.TempDir(), PushNs: -1, StepDownM: -1}.Run(context.Background(), sc)
			if err != nil {
				t.Fatal(err)
			}
			t.Logf("estimate %+v residual %.3g decay %d pairs %d", rep.Eigenvalues, rep.Residual, rep.DecaySteps, rep.Pairs)
			t.Logf("exact %v", exact.Eigenvalues)
			if len(exact.Eigenvalues) != len(rep.Eigenvalues)+1 {
				t.Fatalf("%d exact eigenvalues, %d estimated (want one fewer: the section)", len(exact.Eigenvalues), len(rep.Eigenvalues))
			}
			// The eigenvalues that set the decay (modulus above 0.1) must
			// agree within stabilityTolerance; the small ones are limited by
			// the fit's noise (eigenvalues of a nearly singular map move
			// like the square root of the noise) and must only stay small.
			for i, e := range rep.Eigenvalues {
				x := exact.Eigenvalues[i]
				xm := math.Hypot(x[0], x[1])
				if xm < 0.1 {
					if e.Modulus > 0.1+stabilityTolerance {
						t.Errorf("eigenvalue %d: |λ| %.4f estimated, %.4f exact (small eigenvalues must stay below 0.12)", i, e.Modulus, xm)
					}
					continue
				}
				if d := cmplx.Abs(complex(e.Re, math.Abs(e.Im)) - complex(x[0], math.Abs(x[1]))); d > stabilityTolerance {
					t.Errorf("eigenvalue %d: %.4f%+.4fi estimated, %.4f%+.4fi exact", i, e.Re, e.Im, x[0], x[1])
				}
				if xm < e.ModulusLow-stabilityTolerance || xm > e.ModulusHigh+stabilityTolerance {
					t.Errorf("eigenvalue %d: exact |λ| %.4f outside the bootstrap interval [%.4f, %.4f]", i, xm, e.ModulusLow, e.ModulusHigh)
				}
			}
			last := exact.Eigenvalues[len(exact.Eigenvalues)-1]
			if math.Hypot(last[0], last[1]) > 1e-6 {
				t.Errorf("the exact map's smallest eigenvalue %v is not the section's zero", last)
			}
			if math.Abs(rep.SpectralRadius-exact.SpectralRadius) > stabilityTolerance {
				t.Errorf("spectral radius %.4f, exact %.4f", rep.SpectralRadius, exact.SpectralRadius)
			}
			if name == "level-demo" && rep.Residual > ResidualWarning {
				t.Errorf("residual %.3g for a firmware without state of its own", rep.Residual)
			}
		})
	}
}

func TestFitLinearMapRecoversAKnownMap(t *testing.T) {
	A := mat.NewDense(2, 2, []float64{0.5, 0.2, -0.1, 0.3})
	var X, Y [][]float64
	x := []float64{1, 0}
	for i := 0; i < 10; i++ {
		x = []float64{math.Sin(float64(i) * 1.3), math.Cos(float64(i) * 0.7)}
		y := []float64{0.5*x[0] + 0.2*x[1] + 3, -0.1*x[0] + 0.3*x[1] - 1}
		X, Y = append(X, x), append(Y, y)
	}
	got, res, err := FitLinearMap(X, Y)
	if err != nil {
		t.Fatal(err)
	}
	if !mat.EqualApprox(got, A, 1e-12) || res > 1e-12 {
		t.Errorf("fit %v residual %g, want %v", mat.Formatted(got), res, mat.Formatted(A))
	}
}

func TestDecayStepsOfADiagonalMap(t *testing.T) {
	// For a normal matrix ‖Aⁿ‖₂ = ρⁿ, so n = ⌈ln 0.1 / ln ρ⌉.
	for _, rho := range []float64{0.09, 0.5, 0.8, 0.95} {
		a := mat.NewDense(2, 2, []float64{rho, 0, 0, rho / 2})
		want := int(math.Ceil(math.Log(0.1)/math.Log(rho) - 1e-9))
		if got := DecaySteps(a, 0.1, 1000); got != want {
			t.Errorf("ρ %g: %d steps, want %d", rho, got, want)
		}
	}
	if got := DecaySteps(mat.NewDense(1, 1, []float64{1.01}), 0.1, 1000); got != -1 {
		t.Errorf("growing map: %d, want -1", got)
	}
}

// TestStabilityFlagsAnUnstableGait walks the passive walker on a 0.08 rad
// slope, past its period doubling: `cycle` finds the gait with an
// eigenvalue near −1.34 (the passive gait of the simplest walking model
// loses stability by period doubling as the slope steepens, Garcia et al.
// 1998, see plant/garcia_test.go), so the estimate must say unstable.
func TestStabilityFlagsAnUnstableGait(t *testing.T) {
	if testing.Short() {
		t.Skip("lockstep walk")
	}
	base, err := scenarios.LoadBuiltin("passive-downhill")
	if err != nil {
		t.Fatal(err)
	}
	sc, err := Derive(base, "passive-steep", "slope 0.08 rad, past period doubling", func(s *scenarios.Scenario) {
		s.Terrain.Segments[0].SlopeRad = -0.08
	})
	if err != nil {
		t.Fatal(err)
	}
	exact, err := rig.AnalyseGait(sc)
	if err != nil || !exact.Found || exact.SpectralRadius <= 1 {
		t.Fatalf("cycle: radius %g, %v: the test needs an unstable gait", exact.SpectralRadius, err)
	}
	rep, err := Stability{Dir: t.TempDir(), Warmup: 2, Perturbed: 10, Size: 0.002, PushNs: -1, StepDownM: -1}.Run(context.Background(), sc)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("radius %.4f [%.4f, %.4f], exact %.4f", rep.SpectralRadius, rep.RadiusLow, rep.RadiusHigh, exact.SpectralRadius)
	if rep.SpectralRadius <= 1 || rep.Stable || rep.DecaySteps != -1 {
		t.Errorf("spectral radius %.4f, stable %v, decay %d: want > 1, unstable, never", rep.SpectralRadius, rep.Stable, rep.DecaySteps)
	}
}

// TestGaitSensitivityNormOfTheBuiltInController runs both disturbances on
// the built-in controller and checks the norm against its definition,
// recomputed here from the two run folders' steps.csv (an independent path:
// the record, not the loop's step callback).
func TestGaitSensitivityNormOfTheBuiltInController(t *testing.T) {
	if testing.Short() {
		t.Skip("lockstep walks")
	}
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	rep, err := Stability{Dir: t.TempDir(), Perturbed: 8}.Run(context.Background(), sc)
	if err != nil {
		t.Fatal(err)
	}
	if len(rep.GSN) != 2 {
		t.Fatalf("%d norms, want push and step_down", len(rep.GSN))
	}
	for _, g := range rep.GSN {
		t.Logf("%+v", g)
		if g.Error != "" || !(g.Norm > 0) || math.IsInf(g.Norm, 0) {
			t.Fatalf("%s: norm %g, error %q", g.Disturbance, g.Norm, g.Error)
		}
		ref, err := record.Open(g.ReferenceDir)
		if err != nil {
			t.Fatal(err)
		}
		dis, err := record.Open(g.Dir)
		if err != nil {
			t.Fatal(err)
		}
		var st, sl float64
		n := 0
		for _, a := range ref.Steps {
			for _, b := range dis.Steps {
				if a.Index == b.Index && a.Index >= g.FirstStep {
					st += math.Pow((b.DurationS-a.DurationS)/g.Size, 2)
					sl += math.Pow((b.LengthM-a.LengthM)/g.Size, 2)
					n++
				}
			}
		}
		if n != g.Steps || math.Abs(math.Sqrt(st)-g.StepTime) > 1e-9*g.StepTime || math.Abs(math.Sqrt(sl)-g.StepLength) > 1e-9*g.StepLength {
			t.Errorf("%s: from steps.csv %d steps, %g, %g; reported %d, %g, %g", g.Disturbance, n, math.Sqrt(st), math.Sqrt(sl), g.Steps, g.StepTime, g.StepLength)
		}
	}
}
