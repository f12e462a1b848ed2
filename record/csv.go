package record

import (
	"sort"
	"strconv"
	"strings"
)

// FootNames are the words for foot index 0 and 1 in column names and events.
var FootNames = [2]string{"left", "right"}

// TickColumns returns the telemetry column names for numQ generalized
// coordinates and the given joints, in file order:
//
//	tick, t_s, wall_s, q0.., v0.., angle_<joint>.., rate_<joint>..,
//	cmd_<joint>.., torque_<joint>.., push_x_n, push_y_n,
//	<foot>_mode, <foot>_normal_n, <foot>_tangential_n, <foot>_utilization,
//	<foot>_cop_m, <foot>_contact_x_m (left, then right),
//	kinetic_j, potential_j, latency_us, fresh, stance
func TickColumns(numQ int, joints []string) []string {
	c := []string{"tick", "t_s", "wall_s"}
	for i := 0; i < numQ; i++ {
		c = append(c, "q"+strconv.Itoa(i))
	}
	for i := 0; i < numQ; i++ {
		c = append(c, "v"+strconv.Itoa(i))
	}
	for _, p := range []string{"angle_", "rate_", "cmd_", "torque_"} {
		for _, j := range joints {
			c = append(c, p+j)
		}
	}
	c = append(c, "push_x_n", "push_y_n")
	for _, f := range FootNames {
		c = append(c, f+"_mode", f+"_normal_n", f+"_tangential_n", f+"_utilization", f+"_cop_m", f+"_contact_x_m")
	}
	return append(c, "kinetic_j", "potential_j", "latency_us", "fresh", "stance")
}

// StepColumns are the columns of steps.csv, in file order.
var StepColumns = []string{
	"step", "stance", "start_s", "end_s", "duration_s", "length_m", "speed_mps",
	"peak_utilization", "min_normal_n", "impact_loss_j", "pos_work_j", "neg_work_j",
	"cost_of_transport", "cop_travel_m",
	"hip_x_m", "hip_y_m", "left_foot_x_m", "left_foot_y_m", "right_foot_x_m", "right_foot_y_m",
	"has_torso", "torso_top_x_m", "torso_top_y_m",
}

func csvHeader(cols []string) string { return strings.Join(cols, ",") + "\n" }

func appendTick(b []byte, t *Tick, nq, nj int) []byte {
	b = strconv.AppendInt(b, t.Index, 10)
	b = append(b, ',')
	b = appendFloat(b, t.T)
	b = append(b, ',')
	b = appendFloat(b, t.WallS)
	for i := 0; i < nq; i++ {
		b = append(b, ',')
		b = appendFloat(b, t.Q[i])
	}
	for i := 0; i < nq; i++ {
		b = append(b, ',')
		b = appendFloat(b, t.V[i])
	}
	for _, a := range [...]*[MaxJoints]float64{&t.Angle, &t.Rate, &t.Commanded, &t.Applied} {
		for i := 0; i < nj; i++ {
			b = append(b, ',')
			b = appendFloat(b, a[i])
		}
	}
	b = append(b, ',')
	b = appendFloat(b, t.Push[0])
	b = append(b, ',')
	b = appendFloat(b, t.Push[1])
	for i := range t.Feet {
		f := &t.Feet[i]
		b = append(b, ',')
		b = strconv.AppendInt(b, int64(f.Mode), 10)
		for _, x := range [...]float64{f.NormalN, f.TangentialN, f.Utilization, f.CoP, f.ContactX} {
			b = append(b, ',')
			b = appendFloat(b, x)
		}
	}
	b = append(b, ',')
	b = appendFloat(b, t.Kinetic)
	b = append(b, ',')
	b = appendFloat(b, t.Potential)
	b = append(b, ',')
	b = appendFloat(b, t.LatencyUS)
	b = append(b, ',')
	b = appendBit(b, t.Fresh)
	b = append(b, ',')
	b = strconv.AppendInt(b, int64(t.Stance), 10)
	return append(b, '\n')
}

func appendStep(b []byte, s *Step) []byte {
	b = strconv.AppendInt(b, int64(s.Index), 10)
	b = append(b, ',')
	b = strconv.AppendInt(b, int64(s.Stance), 10)
	p := &s.Pose
	for _, x := range [...]float64{s.StartS, s.EndS, s.DurationS, s.LengthM, s.SpeedMPS,
		s.PeakUtilization, s.MinNormalN, s.ImpactLossJ, s.PosWorkJ, s.NegWorkJ,
		s.CostOfTransport, s.CoPTravelM,
		p.Hip[0], p.Hip[1], p.Feet[0][0], p.Feet[0][1], p.Feet[1][0], p.Feet[1][1]} {
		b = append(b, ',')
		b = appendFloat(b, x)
	}
	b = append(b, ',')
	b = appendBit(b, p.HasTorso)
	b = append(b, ',')
	b = appendFloat(b, p.TorsoTop[0])
	b = append(b, ',')
	b = appendFloat(b, p.TorsoTop[1])
	return append(b, '\n')
}

func sortedKeys(m map[string]float64) []string {
	k := make([]string, 0, len(m))
	for s := range m {
		k = append(k, s)
	}
	sort.Strings(k)
	return k
}
