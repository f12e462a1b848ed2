package rig

import (
	"errors"
	"math"
	"math/cmplx"

	"gaitrig/plant"
	"gaitrig/scenarios"
)

// GaitReport is what the gait finder found for a scenario's walker, in the
// form the cycle command prints and writes as JSON: the period-one gait,
// its step figures and the eigenvalues of its step-to-step map.
type GaitReport struct {
	Scenario               string       `json:"scenario"`                  // scenario name
	Loop                   string       `json:"loop"`                      // passive or closed loop with the built-in controller
	Found                  bool         `json:"found"`                     // a period-one gait was found from the guess
	Stable                 bool         `json:"stable"`                    // every eigenvalue inside the unit circle
	Eigenvalues            [][2]float64 `json:"eigenvalues"`               // of the step-to-step map's Jacobian, each [real, imaginary]
	SpectralRadius         float64      `json:"spectral_radius"`           // largest |λ|; below 1 is stable
	PeriodS                float64      `json:"period_s"`                  // step period, s
	StepLengthM            float64      `json:"step_length_m"`             // m
	SpeedMPS               float64      `json:"speed_mps"`                 // mean forward speed, m/s
	EnergyLostPerStepJ     float64      `json:"energy_lost_per_step_j"`    // at heel strike, J
	PeakRequiredFriction   float64      `json:"peak_required_friction"`    // largest |F_t|/N over the step: the least μ_s the gait needs
	MinNormalForceN        float64      `json:"min_normal_force_n"`        // least stance normal force, N
	ImpulseRatio           float64      `json:"impulse_ratio"`             // |Λ_t|/Λ_n of the heel-strike impulse
	Knees                  bool         `json:"knees"`                     // the walker has knees (the knee figures are null without)
	KneeStrikeEnergyLostJ  float64      `json:"knee_strike_energy_lost_j"` // at the swing knee's strike, J per step
	MinStanceKneeTorqueNM  float64      `json:"min_stance_knee_torque_nm"` // least lock torque of the stance knee over the step, N·m; negative: the latch pulls (a knee without one would buckle)
	KneeStrikeImpulseRatio float64      `json:"knee_strike_impulse_ratio"` // |Λ_t|/Λ_n of the stance foot's impulse at the knee strike: the friction it needs
	Residual               float64      `json:"residual"`                  // of Newton's method on the step-to-step map
	Iterations             int          `json:"iterations"`                // Newton iterations
	Segment                GaitSegment  `json:"segment"`                   // the terrain segment analysed on
	State                  GaitState    `json:"state_after_heel_strike"`   // the gait's state just after heel strike
}

// GaitSegment is the terrain segment a gait analysis used. A period-one
// gait belongs to one slope and one friction: the finder analyses the
// walker on one segment of the scenario's terrain, taken as ground without
// end, so the answer does not depend on where a step happens to cross to
// the next segment.
type GaitSegment struct {
	Index     int     `json:"index"`      // 0-based index in terrain.segments
	Of        int     `json:"of"`         // number of segments of the scenario's terrain
	Chosen    bool    `json:"chosen"`     // asked for; false: the segment under the initial stance foot
	SlopeRad  float64 `json:"slope_rad"`  // positive uphill
	MuStatic  float64 `json:"mu_static"`  // static friction coefficient
	MuKinetic float64 `json:"mu_kinetic"` // kinetic friction coefficient
}

// GaitState is the gait's state just after heel strike, with its convention.
type GaitState struct {
	Convention string    `json:"convention"` // what q, v and reduced mean, in words
	Stance     string    `json:"stance"`     // left or right
	Q          []float64 `json:"q"`          // generalized coordinates
	V          []float64 `json:"v"`          // their rates
	Reduced    []float64 `json:"reduced"`    // the step-to-step map's coordinates
}

// stateConvention explains GaitState for a reader of the JSON alone.
const stateConvention = "just after heel strike, the new stance foot rolling; q = (x_hip m, y_hip m, θ_left, θ_right[, θ_torso]) " +
	"absolute angles in rad counter-clockwise from the world vertical (a leg with θ > 0 has its foot ahead of the hip; " +
	"torso forward lean is θ < 0), v = dq/dt; reduced = (θ_stance, θ_swing[, θ_torso], their rates); " +
	"a walker with knees appends the shank angles (left, right) to q and the stance and swing shank angles after the torso in reduced, " +
	"θ_stance and θ_swing being the thighs' (on this section both knees are straight)"

// AnalyseGait runs the gait finder on a scenario's walker (see FindGait)
// on the terrain segment under the initial stance foot and reports the
// gait. It is AnalyseGaitOn(sc, -1).
func AnalyseGait(sc *scenarios.Scenario) (GaitReport, error) { return AnalyseGaitOn(sc, -1) }

// AnalyseGaitOn runs the gait finder on a scenario's walker standing on
// terrain segment segment (0-based; < 0: the segment under the initial
// stance foot), with that segment's slope and friction extended without
// end, and reports the gait and the segment. On a segment other than the
// one under the initial stance foot the walker starts from the scenario's
// initial angles and rates at the middle of the segment. A scenario that
// cannot be analysed, or a segment that does not exist, is a configuration
// error (ErrConfig) with an empty report; a finder that finds no gait from
// the guess gives its error with the report (Found false).
func AnalyseGaitOn(sc *scenarios.Scenario, segment int) (GaitReport, error) {
	cfg, err := FromScenario(sc)
	if err != nil {
		return GaitReport{}, ConfigError(err)
	}
	full, err := NewModel(sc, cfg)
	if err != nil {
		return GaitReport{}, ConfigError(err)
	}
	p := full.Params()
	segs := p.Terrain.Segments
	under := 0
	if guess, err := gaitGuess(sc, full); err == nil {
		under = guess.Seg[guess.Stance]
	}
	seg := GaitSegment{Index: under, Of: len(segs)}
	if segment >= 0 {
		if segment >= len(segs) {
			return GaitReport{}, Configf("scenario %s: --segment %d: the terrain has %d segments (0 to %d)", sc.Name, segment, len(segs), len(segs)-1)
		}
		seg.Index, seg.Chosen = segment, true
	}
	// The segment's start point, as the plant lays the polyline out.
	start := p.Terrain.Start
	for _, s := range segs[:seg.Index] {
		start[0] += s.Length * math.Cos(s.Slope)
		start[1] += s.Length * math.Sin(s.Slope)
	}
	on := segs[seg.Index]
	seg.SlopeRad, seg.MuStatic, seg.MuKinetic = on.Slope, on.MuStatic, on.MuKinetic
	p.Terrain = plant.Terrain{Start: start, Segments: []plant.Segment{on}}
	model, err := plant.New(p, cfg.Physics)
	if err != nil {
		return GaitReport{}, ConfigError(err)
	}
	if seg.Index != under {
		moved := *sc
		moved.Initial.XM = start[0] + 0.5*on.Length*math.Cos(on.Slope)
		sc = &moved
	}
	policy, _, err := GaitPolicy(sc, model)
	if err != nil {
		return GaitReport{}, err
	}
	g, err := FindGait(sc, model)
	if errors.Is(err, ErrConfig) && !g.Found {
		return GaitReport{}, err
	}
	rep := GaitReport{Scenario: sc.Name, Loop: "passive", Found: g.Found && err == nil, Stable: g.Stable,
		PeriodS: g.Period, StepLengthM: g.StepLength, SpeedMPS: g.Speed, EnergyLostPerStepJ: g.EnergyLost,
		PeakRequiredFriction: g.PeakRequiredFriction, MinNormalForceN: g.MinNormal, ImpulseRatio: g.ImpulseRatio,
		Residual: g.Residual, Iterations: g.Iterations, Eigenvalues: [][2]float64{}, Segment: seg,
		KneeStrikeEnergyLostJ: math.NaN(), MinStanceKneeTorqueNM: math.NaN(), KneeStrikeImpulseRatio: math.NaN()}
	if model.NumKnees() > 0 {
		rep.Knees, rep.KneeStrikeEnergyLostJ, rep.MinStanceKneeTorqueNM = true, g.KneeStrikeEnergyLost, g.MinStanceKneeTorque
		rep.KneeStrikeImpulseRatio = g.KneeStrikeImpulseRatio
	}
	if policy != nil {
		rep.Loop = "closed loop with the built-in reference controller"
	}
	for _, e := range g.Eigenvalues {
		rep.Eigenvalues = append(rep.Eigenvalues, [2]float64{real(e), imag(e)})
		rep.SpectralRadius = max(rep.SpectralRadius, cmplx.Abs(e))
	}
	rep.State = gaitStateOf(model, g.State)
	return rep, err
}

// gaitStateOf is s in the report's terms.
func gaitStateOf(m *plant.Model, s plant.State) GaitState {
	n := m.NumDOF()
	st := "left"
	if s.Stance == 1 {
		st = "right"
	}
	return GaitState{Convention: stateConvention, Stance: st,
		Q: append([]float64(nil), s.Q[:n]...), V: append([]float64(nil), s.V[:n]...), Reduced: m.Reduced(&s)}
}
