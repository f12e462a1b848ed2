package batch

import (
	"context"
	"testing"

	"gaitrig/record"
	"gaitrig/scenarios"
)

func TestMarginsOfTheBuiltInController(t *testing.T) {
	if testing.Short() {
		t.Skip("many lockstep walks")
	}
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	res, err := Margins{Dir: t.TempDir(), Jobs: 2}.Run(context.Background(), sc, []Axis{FrictionAxis(), PushAxis("push_forward", 1, 40, 5)})
	if err != nil {
		t.Fatal(err)
	}
	for _, am := range res {
		t.Logf("%s: limit %g %s (±%g) reached %v not monotone %v; pass %+v fail %+v", am.Axis, am.Limit, am.Unit, am.Tolerance, am.Reached, am.NotMonotone, am.LastPass, am.FirstFail)
		if am.Error != "" {
			t.Errorf("%s: %s", am.Axis, am.Error)
			continue
		}
		if am.Reached {
			// The two deciding runs are real run folders that say so.
			p, err := record.Open(am.LastPass.Dir)
			if err != nil || p.Summary.Outcome != record.Pass {
				t.Errorf("%s: last pass %s: %v %v", am.Axis, am.LastPass.Dir, err, p)
			}
			f, err := record.Open(am.FirstFail.Dir)
			if err != nil || f.Summary.Outcome == record.Pass {
				t.Errorf("%s: first fail %s: %v", am.Axis, am.FirstFail.Dir, err)
			}
			if w := am.FirstFail.Value - am.LastPass.Value; w*w > 0.02*0.02*(am.Far-am.Safe)*(am.Far-am.Safe) {
				t.Errorf("%s: bracket %g wider than 2 %% of the range", am.Axis, w)
			}
		}
	}
}
