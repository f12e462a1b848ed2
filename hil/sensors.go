package hil

import (
	"math"
	"math/rand/v2"

	"gaitrig/bridges/protocol"
)

// SensorModel is what the board's sensors make of the true plant state:
// encoder quantization, white noise, constant bias, the IMU and the foot
// switches.
type SensorModel struct {
	// CountsPerRev quantizes joint angles to the encoder resolution; 0
	// leaves them unquantized.
	CountsPerRev int
	// AngleNoise and RateNoise are standard deviations of white noise on
	// joint angles (rad) and rates (rad/s).
	AngleNoise, RateNoise float64
	// AngleBias and RateBias are added to every joint angle and rate.
	AngleBias, RateBias float64
	// PitchNoise and PitchRateNoise are standard deviations of noise on the
	// IMU pitch (rad) and pitch rate (rad/s).
	PitchNoise, PitchRateNoise float64
	// PitchBias and PitchRateBias are added to the IMU pitch and rate.
	PitchBias, PitchRateBias float64
	// ContactThreshold is the normal force (N) above which a foot switch
	// reads closed.
	ContactThreshold float64
}

// Freeze makes one sensor hold the value it read just before Start for
// Duration seconds of simulated time, as a stuck encoder or a hung IMU
// driver would.
type Freeze struct {
	// Sensor is a joint name, "imu" or "contacts".
	Sensor string
	// Start and Duration are simulated seconds.
	Start, Duration float64

	joint int // index of the joint, -1 for imu or contacts
}

// truth is the noise-free reading of the plant, filled by the loop each tick.
type truth struct {
	joints        int
	angle, rate   [protocol.MaxJoints]float64
	pitch, pitchV float64
	normal        [2]float64
	timeUS        uint64
}

// sensorBank turns truth into a protocol.State. It owns the seeded noise
// generator, so the same seed gives the same readings tick for tick.
type sensorBank struct {
	model   SensorModel
	rng     *rand.Rand
	freezes []Freeze
	last    protocol.State // previous output, the value a frozen sensor holds
	started bool
}

func newSensorBank(m SensorModel, freezes []Freeze, rng *rand.Rand) *sensorBank {
	return &sensorBank{model: m, rng: rng, freezes: freezes}
}

// quantize rounds an angle to the nearest encoder count.
func quantize(a float64, countsPerRev int) float64 {
	if countsPerRev <= 0 {
		return a
	}
	step := 2 * math.Pi / float64(countsPerRev)
	return math.Round(a/step) * step
}

// noise draws one zero-mean normal sample; a zero sigma draws nothing, so
// adding a noise-free channel does not shift the random stream of others.
func (b *sensorBank) noise(sigma float64) float64 {
	if sigma <= 0 {
		return 0
	}
	return sigma * b.rng.NormFloat64()
}

// read fills out from tr at simulated time t. It does not allocate.
func (b *sensorBank) read(t float64, tr *truth, out *protocol.State) {
	m := &b.model
	out.TimeUS = tr.timeUS
	out.Joints = uint8(tr.joints)
	for i := 0; i < tr.joints; i++ {
		a := tr.angle[i] + m.AngleBias + b.noise(m.AngleNoise)
		out.Angle[i] = float32(quantize(a, m.CountsPerRev))
		out.Rate[i] = float32(tr.rate[i] + m.RateBias + b.noise(m.RateNoise))
	}
	for i := tr.joints; i < protocol.MaxJoints; i++ {
		out.Angle[i], out.Rate[i] = 0, 0
	}
	out.IMUPitch = float32(tr.pitch + m.PitchBias + b.noise(m.PitchNoise))
	out.IMURate = float32(tr.pitchV + m.PitchRateBias + b.noise(m.PitchRateNoise))
	out.Contacts = 0
	if tr.normal[0] > m.ContactThreshold {
		out.Contacts |= protocol.ContactLeft
	}
	if tr.normal[1] > m.ContactThreshold {
		out.Contacts |= protocol.ContactRight
	}
	if b.started {
		for i := range b.freezes {
			f := &b.freezes[i]
			if t < f.Start || t >= f.Start+f.Duration {
				continue
			}
			switch {
			case f.joint >= 0:
				out.Angle[f.joint] = b.last.Angle[f.joint]
				out.Rate[f.joint] = b.last.Rate[f.joint]
			case f.Sensor == "imu":
				out.IMUPitch, out.IMURate = b.last.IMUPitch, b.last.IMURate
			case f.Sensor == "contacts":
				out.Contacts = b.last.Contacts
			}
		}
	}
	b.last = *out
	b.started = true
}
