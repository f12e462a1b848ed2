package batch

// This file owns the closed-loop stability estimate of a firmware treated as
// a black box (gaitrig stability): small random rate perturbations just
// after heel strikes, a least-squares fit of the linearised step-to-step
// map, its eigenvalues with bootstrap intervals, and the gait sensitivity
// norm of Hobbelen and Wisse (IEEE Transactions on Robotics 23(6), 2007)
// for a hip push and a step-down.

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/cmplx"
	"math/rand"
	"sort"

	"gonum.org/v1/gonum/mat"

	"gaitrig/hil"
	"gaitrig/plant"
	"gaitrig/record"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

// Defaults of Stability's fields.
const (
	// DefaultStabilityWarmup is the number of steps walked before the first
	// perturbation, so a run that starts off its gait settles first (our
	// choice: the built-in controller settles within about ten steps).
	DefaultStabilityWarmup = 12
	// DefaultStabilityPerturbed is the number of perturbed steps; with the
	// built-in firmware and the passive walker 80 pairs give the eigenvalues
	// of modulus above 0.1 within 0.02 of the exact ones (see TestStabilityAgreesWithCycle).
	DefaultStabilityPerturbed = 80
	// DefaultStabilitySize is the standard deviation of each link-rate
	// perturbation, rad/s: small enough for the linear map, large enough to
	// stand above encoder quantization (our choice, from runs of
	// `gaitrig stability`: on the passive walker the fit's residual grows
	// with the size, 0.011 at 0.001 rad/s, 0.034 at 0.003, 0.12 at 0.01,
	// the mark of the map's curvature; the built-in controller's estimate
	// is as good at 0.003 as at 0.01).
	DefaultStabilitySize = 0.003
	// DefaultStabilityBootstrap is the number of bootstrap resamples of the
	// perturbed steps for the confidence intervals (our choice; 200 gives
	// 2.5 % and 97.5 % percentiles from five samples each).
	DefaultStabilityBootstrap = 200
	// DefaultGSNPushNs is the hip push of the gait sensitivity norm, N·s,
	// forward, at the start of a stance (our choice: small against the
	// walker's momentum of about 20 N·s).
	DefaultGSNPushNs = 0.5
	// DefaultGSNStepDownM is the floor drop of the gait sensitivity norm, m
	// (our choice: 5 mm, a tile's edge).
	DefaultGSNStepDownM = 0.005
	// DefaultGSNSteps is the number of steps after a disturbance whose gait
	// indicators enter the gait sensitivity norm (our choice).
	DefaultGSNSteps = 15
	// ResidualWarning is the relative fit residual above which the report
	// says the plant state does not explain the next step (our choice).
	ResidualWarning = 0.1
)

// Stability estimates the closed-loop step-to-step map of a firmware from
// perturbed lockstep runs. The zero value of each field is its default.
type Stability struct {
	// Dir is the folder the run folders go to. Required.
	Dir string
	// Link overrides the scenario's controller link (rig.Options.Link).
	Link string
	// Warmup, Perturbed, Size, Bootstrap: see the Default… constants.
	Warmup, Perturbed int
	Size              float64 // standard deviation of each link-rate perturbation, rad/s
	Bootstrap         int     // number of bootstrap resamples
	// Seed seeds the perturbations and the bootstrap; 0 means 1.
	Seed int64
	// PushNs, StepDownM and GSNSteps set the disturbances of the gait
	// sensitivity norm; a negative PushNs or StepDownM skips that one.
	PushNs, StepDownM float64
	GSNSteps          int // steps after a disturbance that enter the norm
	// Jobs runs the runs in parallel (Scheduler.Jobs).
	Jobs int
}

func (s Stability) withDefaults() Stability {
	if s.Warmup <= 0 {
		s.Warmup = DefaultStabilityWarmup
	}
	if s.Perturbed <= 0 {
		s.Perturbed = DefaultStabilityPerturbed
	}
	if s.Size <= 0 {
		s.Size = DefaultStabilitySize
	}
	if s.Bootstrap <= 0 {
		s.Bootstrap = DefaultStabilityBootstrap
	}
	if s.Seed == 0 {
		s.Seed = 1
	}
	if s.PushNs == 0 {
		s.PushNs = DefaultGSNPushNs
	}
	if s.StepDownM == 0 {
		s.StepDownM = DefaultGSNStepDownM
	}
	if s.GSNSteps <= 0 {
		s.GSNSteps = DefaultGSNSteps
	}
	return s
}

// Eigen is one estimated eigenvalue (Floquet multiplier) with the bootstrap
// interval of its modulus.
type Eigen struct {
	Re      float64 `json:"re"`      // real part
	Im      float64 `json:"im"`      // imaginary part
	Modulus float64 `json:"modulus"` // |Re + i·Im| of the fitted map's eigenvalue
	// ModulusLow and ModulusHigh are the 2.5 % and 97.5 % bootstrap
	// percentiles of the modulus of the eigenvalue of this rank (ranked by
	// modulus).
	ModulusLow  float64 `json:"modulus_low"`
	ModulusHigh float64 `json:"modulus_high"` // 97.5 % bootstrap percentile of the modulus
}

// GSN is the gait sensitivity norm for one disturbance: the 2-norm over
// the steps after it of the change of the gait indicators per unit of
// disturbance (Hobbelen and Wisse 2007), computed from a disturbed and an
// undisturbed lockstep run.
type GSN struct {
	Disturbance string  `json:"disturbance"` // push or step_down
	Size        float64 `json:"size"`        // N·s or m
	Unit        string  `json:"unit"`        // unit of Size
	// StepTime and StepLength are the norms of each indicator alone, s and
	// m per unit of disturbance; Norm combines both (root of the sum of
	// squares, as the paper combines indicators).
	StepTime   float64 `json:"step_time"`
	StepLength float64 `json:"step_length"` // norm of the step length alone, m per unit of disturbance
	Norm       float64 `json:"norm"`        // √(StepTime² + StepLength²); NaN when Error is set
	Steps      int     `json:"steps"`       // steps after the disturbance that entered
	// FirstStep is the first step (as numbered in steps.csv) compared.
	FirstStep int    `json:"first_step"`
	Dir       string `json:"run_dir"` // the disturbed run's folder
	// ReferenceDir is the undisturbed run compared with.
	ReferenceDir string `json:"reference_run_dir"`
	// Error says why the norm could not be computed (the disturbed run fell
	// or ended early); the figures are then NaN.
	Error string `json:"error,omitempty"`
}

// StabilityReport is the result of Stability.Run.
type StabilityReport struct {
	Scenario string `json:"scenario"` // name of the scenario estimated
	// Coordinates names the fitted coordinates of the map, in order.
	Coordinates []string `json:"coordinates"`
	// Eigenvalues of the fitted map, largest modulus first. The map on the
	// heel-strike section has one dimension less than Model.Reduced (the
	// swing leg's angle follows from the feet touching the ground), so
	// `cycle` lists one more eigenvalue, which is 0.
	Eigenvalues    []Eigen `json:"eigenvalues"`
	SpectralRadius float64 `json:"spectral_radius"`      // largest modulus of the fitted map's eigenvalues
	RadiusLow      float64 `json:"spectral_radius_low"`  // 2.5 % bootstrap percentile of the spectral radius
	RadiusHigh     float64 `json:"spectral_radius_high"` // 97.5 % bootstrap percentile of the spectral radius
	Stable         bool    `json:"stable"`               // spectral radius below 1
	// Residual is the fit's relative residual ‖Y − Ŷ‖/‖Y − Ȳ‖ over the
	// perturbed steps: near 0 when the plant state determines the next
	// step, large when the firmware has state of its own or the
	// perturbations leave the linear range.
	Residual        float64 `json:"residual"`
	ResidualWarning string  `json:"residual_warning,omitempty"` // set when Residual is above ResidualWarning; says what that means
	// DecaySteps is the least n with ‖Aⁿ‖₂ ≤ 0.1: after n steps every
	// perturbation has decayed by at least 90 %; −1 when none within 1000.
	DecaySteps int     `json:"decay_steps_90"`
	Pairs      int     `json:"perturbed_steps"`    // perturbed step pairs the map is fitted to
	Size       float64 `json:"perturbation_radps"` // Stability.Size used, rad/s
	Dir        string  `json:"run_dir"`            // the perturbed run's folder
	GSN        []GSN   `json:"gait_sensitivity"`   // one per disturbance (push, step down) not skipped
	Caution    string  `json:"caution"`            // record.Caution: a pass is not a safety certificate

	a *mat.Dense // the fitted map, for tests
}

// stepSample is what the perturbation hook records at one heel strike.
type stepSample struct {
	step      int
	pre, post []float64 // section coordinates before and after the perturbation
	contactX  float64   // new stance foot's contact point, m
}

// sectionState returns the map coordinates of s moved back from the end of
// the tick to the heel strike at strikeT along the flow, z − (t − t_hs)·ż,
// so every step is seen on the same section however the tick falls (the
// error is of order (t − t_hs)² ≤ one tick squared). The step back is
// taken on the generalized coordinates and then reduced by Model.Reduced,
// so the ordering of the map coordinates has one home, the plant.
func sectionState(m *plant.Model, s *plant.State, in *plant.Input, strikeT float64) []float64 {
	acc, ok := m.Accel(s, in)
	dt := s.T - strikeT
	if !ok || dt <= 0 {
		return m.Reduced(s)
	}
	back := *s
	for k := 0; k < m.NumDOF(); k++ {
		back.Q[k] -= dt * s.V[k]
		back.V[k] -= dt * acc[k]
	}
	return m.Reduced(&back)
}

// fitCoords drops the swing leg's angle (index 1) from the reduced
// coordinates: on the section it follows from the others.
func fitCoords(z []float64) []float64 {
	out := make([]float64, 0, len(z)-1)
	out = append(out, z[0])
	return append(out, z[2:]...)
}

func coordNames(m *plant.Model) []string {
	names := []string{"theta_stance_rad"}
	if m.HasTorso() {
		names = append(names, "theta_torso_rad")
	}
	names = append(names, "omega_stance_radps", "omega_swing_radps")
	if m.HasTorso() {
		names = append(names, "omega_torso_radps")
	}
	return names
}

// perturbHook returns the AfterHeelStrike hook that records every heel
// strike and perturbs the link rates at steps first … last.
func perturbHook(m *plant.Model, first, last int, size float64, rng *rand.Rand, out *[]stepSample, fail *error) func(int, float64, *plant.State, *plant.Input) {
	nl := m.NumLinks()
	return func(step int, strikeT float64, s *plant.State, in *plant.Input) {
		pre := sectionState(m, s, in, strikeT)
		c := m.Contacts(s, in)
		smp := stepSample{step: step, pre: pre, post: pre, contactX: c[s.Stance].Point[0]}
		if step >= first && step <= last && *fail == nil {
			z := m.Reduced(s)
			base, err0 := m.FromReduced(z, s.Stance, s.Q[0])
			for i := 0; i < nl; i++ {
				z[nl+i] += size * rng.NormFloat64()
			}
			ns, err := m.FromReduced(z, s.Stance, s.Q[0])
			if err == nil {
				err = err0
			}
			if err != nil {
				*fail = err
			} else {
				// Only the rates change: the rolling constraint gives the hip
				// velocity from the stance leg's rate. The change is added,
				// not the state replaced, so a foot rolling on a moving belt
				// keeps the belt's velocity (the constraint is linear in the
				// velocities, and the change satisfies its fixed-ground form).
				for i := range s.V {
					s.V[i] += ns.V[i] - base.V[i]
				}
				smp.post = sectionState(m, s, in, strikeT)
			}
		}
		*out = append(*out, smp)
	}
}

// Run estimates the stability of sc's firmware. The perturbation run and
// the disturbed runs of the gait sensitivity norm go through rig.Prepare
// in lockstep.
func (st Stability) Run(ctx context.Context, sc *scenarios.Scenario) (StabilityReport, error) {
	st = st.withDefaults()
	rep := StabilityReport{Scenario: sc.Name, Size: st.Size, Caution: record.Caution}
	if st.Dir == "" {
		return rep, rig.Configf("stability: no output folder")
	}
	total := st.Warmup + st.Perturbed + 1
	rng := rand.New(rand.NewSource(st.Seed))
	var samples []stepSample
	var hookErr error
	runDir, res, err := st.runHooked(ctx, sc, total, nil, func(m *plant.Model) func(int, float64, *plant.State, *plant.Input) {
		rep.Coordinates = coordNames(m)
		return perturbHook(m, st.Warmup, st.Warmup+st.Perturbed-1, st.Size, rng, &samples, &hookErr)
	})
	rep.Dir = runDir
	if err != nil {
		return rep, err
	}
	if hookErr != nil {
		return rep, fmt.Errorf("stability: perturbation: %w", hookErr)
	}
	var X, Y [][]float64
	for i := 0; i+1 < len(samples); i++ {
		a, b := samples[i], samples[i+1]
		if a.step < st.Warmup || a.step > st.Warmup+st.Perturbed-1 || b.step != a.step+1 {
			continue
		}
		X = append(X, fitCoords(a.post))
		Y = append(Y, fitCoords(b.pre))
	}
	d := 0
	if len(X) > 0 {
		d = len(X[0])
	}
	rep.Pairs = len(X)
	if len(X) < d+2 || d == 0 {
		return rep, fmt.Errorf("stability: run %s: %d perturbed steps completed (outcome %s, %s); the fit needs at least %d",
			runDir, len(X), res.Summary.Outcome, res.Summary.Reason, d+2)
	}
	A, resid, err := FitLinearMap(X, Y)
	if err != nil {
		return rep, fmt.Errorf("stability: %w", err)
	}
	rep.a = A
	rep.Residual = resid
	if resid > ResidualWarning {
		rep.ResidualWarning = fmt.Sprintf("the fit leaves %.0f %% of the step-to-step variation unexplained: the firmware probably keeps state of its own (filters, phase estimates, integrators) that the plant state does not capture, or the perturbations are too large for a linear map; the eigenvalues describe the plant state's part only", 100*resid)
	}
	ev := SortedEigenvalues(A)
	rep.SpectralRadius = cmplx.Abs(ev[0])
	rep.Stable = rep.SpectralRadius < 1
	rep.DecaySteps = DecaySteps(A, 0.1, 1000)
	// Bootstrap over the perturbed steps: resample pairs with replacement,
	// refit, rank eigenvalues by modulus.
	mods := make([][]float64, len(ev))
	brng := rand.New(rand.NewSource(st.Seed + 1))
	for b := 0; b < st.Bootstrap; b++ {
		xb := make([][]float64, len(X))
		yb := make([][]float64, len(X))
		for i := range xb {
			j := brng.Intn(len(X))
			xb[i], yb[i] = X[j], Y[j]
		}
		Ab, _, err := FitLinearMap(xb, yb)
		if err != nil {
			continue // a resample that repeats too few steps is singular
		}
		for i, e := range SortedEigenvalues(Ab) {
			mods[i] = append(mods[i], cmplx.Abs(e))
		}
	}
	for i, e := range ev {
		lo, hi := percentile(mods[i], 0.025), percentile(mods[i], 0.975)
		rep.Eigenvalues = append(rep.Eigenvalues, Eigen{Re: real(e), Im: imag(e), Modulus: cmplx.Abs(e), ModulusLow: lo, ModulusHigh: hi})
	}
	rep.RadiusLow, rep.RadiusHigh = rep.Eigenvalues[0].ModulusLow, rep.Eigenvalues[0].ModulusHigh
	if st.PushNs > 0 || st.StepDownM > 0 {
		rep.GSN, err = st.gaitSensitivity(ctx, sc)
		if err != nil {
			return rep, err
		}
	}
	return rep, nil
}

// runHooked runs sc in lockstep for steps steps, collecting the step rows
// in steps and with the hook made by mk (if any) installed, and returns
// the run folder and result.
func (st Stability) runHooked(ctx context.Context, sc *scenarios.Scenario, steps int, rows *[]hil.StepInfo, mk func(*plant.Model) func(int, float64, *plant.State, *plant.Input)) (string, rig.Result, error) {
	o := rig.Options{Link: st.Link, Clock: hil.Lockstep, OutRoot: st.Dir, MaxSteps: steps, Duration: 5 * float64(steps)}
	if rows != nil {
		o.OnStep = func(s hil.StepInfo) { *rows = append(*rows, s) }
	}
	p, err := rig.Prepare(ctx, sc, o)
	if err != nil {
		return "", rig.Result{}, err
	}
	defer p.Close()
	if mk != nil {
		p.Config.AfterHeelStrike = mk(p.Model)
	}
	res, err := p.Run(ctx)
	return p.Dir, res, err
}

// gaitSensitivity runs the undisturbed reference and the disturbed runs and
// computes the gait sensitivity norms.
func (st Stability) gaitSensitivity(ctx context.Context, sc *scenarios.Scenario) ([]GSN, error) {
	at := st.Warmup
	total := at + st.GSNSteps + 1
	var nominal []stepSample
	var none error
	var steps []hil.StepInfo
	refDir, res, err := st.runHooked(ctx, sc, total, &steps, func(m *plant.Model) func(int, float64, *plant.State, *plant.Input) {
		return perturbHook(m, 0, -1, 0, nil, &nominal, &none)
	})
	if err != nil {
		return nil, err
	}
	if len(steps) < total {
		return nil, fmt.Errorf("stability: the undisturbed run walked %d of %d steps (%s: %s)", len(steps), total, res.Summary.Outcome, res.Summary.Reason)
	}
	var out []GSN
	if st.PushNs > 0 {
		v, err := Derive(sc, sc.Name+"-gsn-push", fmt.Sprintf("a forward hip push of %g N·s at the heel strike of step %d (gait sensitivity norm)", st.PushNs, at), func(s *scenarios.Scenario) {
			s.Faults = append(s.Faults, scenarios.Fault{Kind: "push", AtStep: at, ImpulseNS: []float64{st.PushNs, 0}})
		})
		if err != nil {
			return nil, err
		}
		out = append(out, st.disturbed(ctx, v, "push", st.PushNs, "N·s", at, steps))
	}
	if st.StepDownM > 0 {
		// The edge lies 60 % of the way from the stance contact at the heel
		// strike of step at to the next one: under the swing foot's path,
		// ahead of where the stance foot rolls to.
		var x0, x1 float64
		for _, s := range nominal {
			if s.step == at {
				x0 = s.contactX
			}
			if s.step == at+1 {
				x1 = s.contactX
			}
		}
		edge := x0 + 0.6*(x1-x0)
		v, err := Derive(sc, sc.Name+"-gsn-step-down", fmt.Sprintf("the floor drops by %g m at x = %.4f m during step %d (gait sensitivity norm)", st.StepDownM, edge, at+1), func(s *scenarios.Scenario) {
			s.Terrain = StepDown(s.Terrain, edge, st.StepDownM)
		})
		if err != nil {
			return nil, err
		}
		out = append(out, st.disturbed(ctx, v, "step_down", st.StepDownM, "m", at, steps))
	}
	for i := range out {
		out[i].ReferenceDir = refDir
	}
	return out, nil
}

// disturbed runs one disturbed variant and compares its gait indicators
// (step time, step length) with the undisturbed run's, step by step from
// the first step the disturbance acts on.
func (st Stability) disturbed(ctx context.Context, v *scenarios.Scenario, kind string, size float64, unit string, at int, nominal []hil.StepInfo) GSN {
	g := GSN{Disturbance: kind, Size: size, Unit: unit, StepTime: math.NaN(), StepLength: math.NaN(), Norm: math.NaN()}
	total := at + st.GSNSteps + 1
	var steps []hil.StepInfo
	dir, res, err := st.runHooked(ctx, v, total, &steps, nil)
	g.Dir = dir
	if err != nil {
		g.Error = err.Error()
		return g
	}
	if len(steps) < total {
		g.Error = fmt.Sprintf("the disturbed run walked %d of %d steps (%s: %s): the disturbance is beyond the linear range", len(steps), total, res.Summary.Outcome, res.Summary.Reason)
		return g
	}
	g.FirstStep = at + 1
	g.StepTime, g.StepLength, g.Steps = GaitSensitivityNorm(nominal[at:total], steps[at:total], size)
	g.Norm = math.Hypot(g.StepTime, g.StepLength)
	return g
}

// GaitSensitivityNorm is the 2-norm over the steps of the change of each
// gait indicator (step time, step length) per unit of disturbance size,
// disturbed minus undisturbed (Hobbelen and Wisse 2007, computed from the
// responses rather than a linear model).
func GaitSensitivityNorm(nominal, disturbed []hil.StepInfo, size float64) (stepTime, stepLength float64, steps int) {
	n := len(nominal)
	if len(disturbed) < n {
		n = len(disturbed)
	}
	var st, sl float64
	for i := 0; i < n; i++ {
		dt := (disturbed[i].DurationS - nominal[i].DurationS) / size
		dl := (disturbed[i].LengthM - nominal[i].LengthM) / size
		st += dt * dt
		sl += dl * dl
	}
	return math.Sqrt(st), math.Sqrt(sl), n
}

// StepDown returns terrain t with the floor dropping by h at horizontal
// position x: the segment that holds x is split, and a steep segment (80°,
// our choice: the plant's segments must be less than vertical) of height h
// is put between the parts. Segments after it keep their slopes, lowered
// by h. A position outside the terrain returns it unchanged.
func StepDown(t scenarios.Terrain, x, h float64) scenarios.Terrain {
	const wall = 80 * math.Pi / 180
	out := scenarios.Terrain{StartM: t.StartM}
	px := t.StartM[0]
	done := false
	for _, s := range t.Segments {
		dx := s.LengthM * math.Cos(s.SlopeRad)
		if !done && x > px && x < px+dx {
			l1 := (x - px) / math.Cos(s.SlopeRad)
			a, drop, b := s, s, s
			a.LengthM = l1
			drop.LengthM = h / math.Sin(wall)
			drop.SlopeRad = -wall
			b.LengthM = s.LengthM - l1
			out.Segments = append(out.Segments, a, drop, b)
			done = true
		} else {
			out.Segments = append(out.Segments, s)
		}
		px += dx
	}
	return out
}

// FitLinearMap fits y = A x + b by least squares (gonum's QR solve) over
// the pairs (X[i], Y[i]) and returns A and the relative residual
// ‖Y − Ŷ‖_F / ‖Y − Ȳ‖_F.
func FitLinearMap(X, Y [][]float64) (*mat.Dense, float64, error) {
	n := len(X)
	if n == 0 || len(Y) != n {
		return nil, math.NaN(), errors.New("fit: no pairs")
	}
	d, e := len(X[0]), len(Y[0])
	if n < d+1 {
		return nil, math.NaN(), fmt.Errorf("fit: %d pairs for %d unknowns per row", n, d+1)
	}
	// Centre the regressors so the constant column does not spoil the
	// conditioning of perturbations that are small against the state.
	mx := make([]float64, d)
	my := make([]float64, e)
	for i := 0; i < n; i++ {
		for j := 0; j < d; j++ {
			mx[j] += X[i][j] / float64(n)
		}
		for j := 0; j < e; j++ {
			my[j] += Y[i][j] / float64(n)
		}
	}
	R := mat.NewDense(n, d, nil)
	T := mat.NewDense(n, e, nil)
	for i := 0; i < n; i++ {
		for j := 0; j < d; j++ {
			R.Set(i, j, X[i][j]-mx[j])
		}
		for j := 0; j < e; j++ {
			T.Set(i, j, Y[i][j]-my[j])
		}
	}
	var qr mat.QR
	qr.Factorize(R)
	var W mat.Dense // d × e, Tᵀ ≈ ... : T ≈ R W, so A = Wᵀ
	if err := qr.SolveTo(&W, false, T); err != nil {
		return nil, math.NaN(), fmt.Errorf("fit: %w", err)
	}
	if !finiteDense(&W) {
		return nil, math.NaN(), errors.New("fit: the perturbed steps do not span the state (singular)")
	}
	var fit mat.Dense
	fit.Mul(R, &W)
	var num, den float64
	for i := 0; i < n; i++ {
		for j := 0; j < e; j++ {
			r := T.At(i, j) - fit.At(i, j)
			num += r * r
			den += T.At(i, j) * T.At(i, j)
		}
	}
	A := mat.DenseCopyOf(W.T())
	if den == 0 {
		return A, 0, nil
	}
	return A, math.Sqrt(num / den), nil
}

func finiteDense(m *mat.Dense) bool {
	r, c := m.Dims()
	for i := 0; i < r; i++ {
		for j := 0; j < c; j++ {
			if v := m.At(i, j); math.IsNaN(v) || math.IsInf(v, 0) || math.Abs(v) > 1e12 {
				return false
			}
		}
	}
	return true
}

// SortedEigenvalues returns the eigenvalues of a square matrix, largest
// modulus first (ties: larger imaginary part first), as plant.Gait orders
// them.
func SortedEigenvalues(a *mat.Dense) []complex128 {
	var e mat.Eigen
	if !e.Factorize(a, mat.EigenNone) {
		r, _ := a.Dims()
		v := make([]complex128, r)
		for i := range v {
			v[i] = complex(math.NaN(), 0)
		}
		return v
	}
	v := e.Values(nil)
	sort.Slice(v, func(i, j int) bool {
		ai, aj := cmplx.Abs(v[i]), cmplx.Abs(v[j])
		if ai != aj {
			return ai > aj
		}
		return imag(v[i]) > imag(v[j])
	})
	return v
}

// DecaySteps is the least n ≤ max with ‖Aⁿ‖₂ ≤ factor, or −1.
func DecaySteps(a *mat.Dense, factor float64, max int) int {
	r, _ := a.Dims()
	p := mat.NewDense(r, r, nil)
	for i := 0; i < r; i++ {
		p.Set(i, i, 1)
	}
	var next mat.Dense
	for n := 1; n <= max; n++ {
		next.Mul(p, a)
		p.Copy(&next)
		if spectralNorm(p) <= factor {
			return n
		}
	}
	return -1
}

// spectralNorm is ‖a‖₂, the largest singular value (mat.Norm's 2 is the
// Frobenius norm for a matrix).
func spectralNorm(a *mat.Dense) float64 {
	var svd mat.SVD
	if !svd.Factorize(a, mat.SVDNone) {
		return math.Inf(1)
	}
	return svd.Values(nil)[0]
}

// percentile of v at q in [0, 1] (nearest rank on a sorted copy); NaN for
// an empty v.
func percentile(v []float64, q float64) float64 {
	if len(v) == 0 {
		return math.NaN()
	}
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	i := int(math.Ceil(q*float64(len(s)))) - 1
	if i < 0 {
		i = 0
	}
	if i >= len(s) {
		i = len(s) - 1
	}
	return s[i]
}
