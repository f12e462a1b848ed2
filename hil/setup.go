package hil

import (
	"os"

	"gaitrig/plant"
	"gaitrig/record"
)

// FootModes names the contact-mode codes of record.Foot.Mode, index = code.
var FootModes = []string{plant.Free.String(), plant.Rolling.String(), plant.Sliding.String()}

// Manifest fills the loop's part of a run manifest for record.Create: the
// configuration (with its defaults), the model and the exact initial state
// a replay starts from. What the run was made from (scenario name, file,
// text and hash) is the caller's to add: rig.Manifest does it for a
// scenario run.
func Manifest(cfg Config, m *plant.Model, initial plant.State, link, toolVersion string) (record.Manifest, error) {
	c, err := cfg.withDefaults()
	if err != nil {
		return record.Manifest{}, err
	}
	host, _ := os.Hostname()
	n := m.NumDOF()
	return record.Manifest{
		Plant:       record.PlantOf(m.Params()),
		ToolVersion: toolVersion,
		Seed:        c.Seed,
		Clock:       string(c.Clock),
		TickHz:      c.TickHz,
		Link:        link,
		Host:        host,
		NumQ:        n,
		JointNames:  append([]string(nil), m.JointNames()...),
		FootModes:   FootModes,
		InitialQ:    append([]float64(nil), initial.Q[:n]...),
		InitialV:    append([]float64(nil), initial.V[:n]...),
	}, nil
}
