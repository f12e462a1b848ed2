package report

import (
	"fmt"
	"math"
	"time"

	"gaitrig/record"
)

// This file makes SYNTHETIC run data for the report tests. It is not the
// output of the plant: it is a kinematic compass gait with rolling arc feet
// (stance leg turning at a constant rate, the swing leg on a cosine
// profile), with the ground force of a point mass at the hip plus a short
// heel-strike transient. The numbers are physically plausible (a 20 kg
// walker, 0.9 m legs, foot radius 0.3 of the leg, about 0.7 m/s) so the
// plots look like a real run, but they test the report, not any physics.

// synthOpts sets up a synthetic run.
type synthOpts struct {
	durationS float64 // simulated length of the run
	hz        float64 // tick rate
	patchMu   float64 // μ_s of the low-friction patch from 2.4 m to 3.6 m
	withTorso bool    // draw a torso in the poses
}

type synthRun struct {
	m      record.Manifest
	ticks  []record.Tick
	steps  []record.Step
	events []record.Event
	sum    record.Summary
}

const (
	synthLeg    = 0.9   // leg length, m
	synthRadius = 0.27  // foot radius, m (0.3 of the leg)
	synthMass   = 20.0  // total mass, lumped at the hip for the force, kg
	synthG      = 9.81  // gravity, m/s²
	synthPeriod = 0.55  // step period, s
	synthAlpha  = 0.22  // half the inter-leg angle at heel strike, rad
	synthMuS    = 0.6   // μ_s away from the patch
	synthPatch0 = 2.4   // patch start, m
	synthPatch1 = 3.6   // patch end, m
	synthSlope2 = -0.03 // slope of the last segment, rad (gentle downhill)
)

func makeSynthRun(o synthOpts) synthRun {
	r := synthRun{}
	pl := &record.Plant{
		HipMassKG:   synthMass,
		GravityMPS2: synthG,
		Legs:        [2]record.Leg{{LengthM: synthLeg, FootRadiusM: synthRadius}, {LengthM: synthLeg, FootRadiusM: synthRadius}},
		Terrain: record.Terrain{Segments: []record.TerrainSegment{
			{LengthM: synthPatch0, SlopeRad: 0, MuStatic: synthMuS, MuKinetic: 0.5},
			{LengthM: synthPatch1 - synthPatch0, SlopeRad: 0, MuStatic: o.patchMu, MuKinetic: o.patchMu * 0.8},
			{LengthM: 200, SlopeRad: synthSlope2, MuStatic: synthMuS, MuKinetic: 0.5},
		}},
	}
	if o.withTorso {
		pl.Torso = &record.Torso{MassKG: 8, COMM: 0.3, InertiaKGM2: 0.5}
	}
	r.m = record.Manifest{
		Scenario:     "synthetic-level-walk",
		ScenarioFile: "synthetic (made by the report tests)",
		ScenarioText: "synthetic: no scenario file\n",
		ScenarioHash: "0f3c1e9a5b7d2468ace013579bdf2468ace013579bdf2468ace013579bdf2468",
		Plant:        pl,
		Greeting:     record.Greeting{Name: "synthetic-fw", Build: "test-1", Protocol: 1, Actuators: 1},
		ToolVersion:  "test",
		Seed:         7,
		Clock:        "lockstep",
		TickHz:       o.hz,
		Link:         "none (synthetic data)",
		Host:         "test",
		StartTime:    time.Date(2026, 12, 1, 12, 0, 0, 0, time.UTC),
		NumQ:         4,
		JointNames:   []string{"hip"},
		FootModes:    []string{"free", "rolling", "sliding"},
	}
	if o.withTorso {
		r.m.NumQ = 5
	}
	theta := [2]float64{synthAlpha, -synthAlpha}
	mu := func(x float64) float64 {
		if x >= synthPatch0 && x < synthPatch1 {
			return o.patchMu
		}
		return synthMuS
	}
	w := -2 * synthAlpha / synthPeriod // stance angular rate, rad/s
	stance := 0
	contact := 0.0 // x of the stance contact at the start of the step
	stepStart := 0.0
	n := int(math.Round(o.durationS * o.hz))
	r.ticks = make([]record.Tick, n)
	var peakU, minN, posW, negW float64
	resetStep := func() { peakU, minN, posW, negW = 0, math.Inf(1), 0, 0 }
	resetStep()
	alarmed := false
	r.events = append(r.events, record.Event{Tick: 0, T: 0, Kind: "firmware_greeting", Severity: record.Info, Message: "firmware said hello", Segment: record.NoSegment})
	alarms := map[string]int{}
	var lastHip [2]float64
	for i := 0; i < n; i++ {
		t := float64(i) / o.hz
		tau := t - stepStart
		if tau >= synthPeriod {
			// Heel strike: the swing foot lands, the legs swap roles.
			ths := synthAlpha - 2*synthAlpha // stance angle at the strike
			cx := contact + synthRadius*(synthAlpha-ths)
			hipX := cx - (synthLeg-synthRadius)*math.Sin(ths)
			hipY := synthRadius + (synthLeg-synthRadius)*math.Cos(ths)
			newContact := hipX + (synthLeg-synthRadius)*math.Sin(synthAlpha)
			vy := -(synthLeg - synthRadius) * math.Sin(ths) * w
			length := newContact - contact
			pose := record.Pose{Hip: [2]float64{hipX, hipY}}
			pose.Feet[stance] = [2]float64{cx, 0}
			pose.Feet[1-stance] = [2]float64{newContact, 0}
			if o.withTorso {
				pose.HasTorso = true
				pose.TorsoTop = [2]float64{hipX - 0.05, hipY + 0.5}
			}
			r.steps = append(r.steps, record.Step{
				Index: len(r.steps) + 1, Stance: stance, StartS: stepStart, EndS: stepStart + synthPeriod,
				DurationS: synthPeriod, LengthM: length, SpeedMPS: length / synthPeriod,
				PeakUtilization: peakU, MinNormalN: minN, ImpactLossJ: 0.5 * synthMass * vy * vy,
				PosWorkJ: posW, NegWorkJ: negW, CostOfTransport: posW / (synthMass * synthG * length),
				CoPTravelM: synthRadius * 2 * synthAlpha, Pose: pose,
			})
			stance = 1 - stance
			contact = newContact
			stepStart += synthPeriod
			tau = t - stepStart
			resetStep()
			alarmed = false
		}
		ths := synthAlpha + w*tau
		thw := -synthAlpha + synthAlpha*(1-math.Cos(math.Pi*tau/synthPeriod))
		thwDot := synthAlpha * math.Pi / synthPeriod * math.Sin(math.Pi*tau/synthPeriod)
		theta[stance], theta[1-stance] = ths, thw
		cx := contact + synthRadius*(synthAlpha-ths)
		hipX := cx - (synthLeg-synthRadius)*math.Sin(ths)
		hipY := synthRadius + (synthLeg-synthRadius)*math.Cos(ths)
		vx := -synthRadius*w - (synthLeg-synthRadius)*math.Cos(ths)*w
		vy := -(synthLeg - synthRadius) * math.Sin(ths) * w
		ax := (synthLeg - synthRadius) * math.Sin(ths) * w * w
		ay := -(synthLeg - synthRadius) * math.Cos(ths) * w * w
		// Heel-strike transient: a braking push and an extra load that
		// decay in 30 ms.
		k := math.Exp(-tau / 0.03)
		normal := synthMass*(synthG+ay) + 150*k
		tang := synthMass*ax - 60*k
		muHere := mu(cx)
		util := math.Abs(tang) / (muHere * normal)
		var tick record.Tick
		tick.Index = int64(i)
		tick.T = t
		tick.WallS = t
		tick.Q = [record.MaxQ]float64{hipX, hipY, theta[0], theta[1]}
		if o.withTorso {
			tick.Q[4] = -0.1 + 0.03*math.Sin(2*math.Pi*tau/synthPeriod) // a gentle forward lean that rocks with the step
		}
		rates := [2]float64{}
		rates[stance], rates[1-stance] = w, thwDot
		tick.V = [record.MaxQ]float64{vx, vy, rates[0], rates[1]}
		tick.Angle[0] = theta[1] - theta[0]
		tick.Rate[0] = rates[1] - rates[0]
		torque := 1.5 * math.Sin(2*math.Pi*tau/synthPeriod)
		if stance == 1 {
			torque = -torque
		}
		tick.Commanded[0], tick.Applied[0] = torque, torque
		tick.Feet[stance] = record.Foot{Mode: 1, NormalN: normal, TangentialN: tang, Utilization: util, CoP: synthRadius * (synthAlpha - ths), ContactX: cx}
		tick.Feet[1-stance] = record.Foot{Mode: 0, ContactX: math.NaN()}
		tick.Kinetic = 0.5 * synthMass * (vx*vx + vy*vy)
		tick.Potential = synthMass * synthG * hipY
		tick.LatencyUS = math.NaN()
		tick.Fresh = true
		tick.Stance = stance
		r.ticks[i] = tick
		pw := torque * tick.Rate[0] / o.hz
		if pw > 0 {
			posW += pw
		} else {
			negW += pw
		}
		peakU = math.Max(peakU, util)
		minN = math.Min(minN, normal)
		if util > 1 && !alarmed {
			alarmed = true
			kind := "slip"
			alarms[kind]++
			r.events = append(r.events, record.Event{
				Tick: int64(i), T: t, Kind: kind, Severity: record.Warn, Foot: footNames[stance],
				Segment: 1, Message: fmt.Sprintf("%s foot needs %.2f of the static friction limit", footNames[stance], util),
				Values: map[string]float64{"utilization": util, "limit": 1},
			})
		}
		lastHip = [2]float64{hipX, hipY}
	}
	peak, least := 0.0, math.Inf(1)
	for _, s := range r.steps {
		peak = math.Max(peak, s.PeakUtilization)
		least = math.Min(least, s.MinNormalN)
	}
	outcome := record.Pass
	crit := []record.Criterion{
		{Name: "min_steps", Pass: len(r.steps) >= 5, Value: float64(len(r.steps)), Limit: 5},
		{Name: "max_friction_utilization", Pass: peak <= 0.9, Value: peak, Limit: 0.9},
		{Name: "min_normal_force_n", Pass: least >= 20, Value: least, Limit: 20},
	}
	for _, c := range crit {
		if !c.Pass {
			outcome = record.Fail
		}
	}
	r.sum = record.Summary{
		Outcome: outcome, Steps: len(r.steps), Ticks: int64(n), SimTimeS: float64(n) / o.hz, WallTimeS: float64(n) / o.hz,
		Alarms: alarms, PeakFrictionUtilization: peak, MinNormalForceN: least,
		MeanSpeedMPS: lastHip[0] / (float64(n) / o.hz), Criteria: crit, Caution: record.Caution, ToolVersion: "test",
	}
	return r
}
