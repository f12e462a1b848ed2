package history

import (
	"context"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gaitrig/batch"
	"gaitrig/internal/browsertest"
	"gaitrig/scenarios"
)

// envelopeBuilds stores, for eight builds, a run's result and an envelope
// result (margins of two axes and a stability estimate) of level-demo.
// The friction margin's limit rises by 0.008 a build from the fourth
// (each within the search's 0.0119 resolution, 0.04 in total over the last
// five): a drift. The push axis was not measured in build 6.
func envelopeBuilds(t *testing.T, s *Store) {
	t.Helper()
	ctx := context.Background()
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	friction := 0.36
	for i := 0; i < 8; i++ {
		rev := "rev" + string(rune('a'+i))
		run := Result{Command: "run", Scenario: "level-demo", FirmwareRevision: rev, Outcome: "pass", Steps: 30, MeanSpeedMPS: 0.78,
			PeakFriction: 0.32, MinNormalForceN: 210, LatencyP50US: math.NaN(), LatencyP99US: math.NaN(), LatencyMaxUS: math.NaN()}
		if err := s.Add(ctx, &run); err != nil {
			t.Fatal(err)
		}
		if i >= 3 {
			friction += 0.008
		}
		push := batch.AxisMargin{Axis: "push_backward_late", Unit: "N·s", Limit: 27, Tolerance: 0.5, Reached: true, Meets: true}
		if i == 6 {
			push = batch.AxisMargin{Axis: "push_backward_late", Unit: "N·s", Limit: math.NaN(), NotMeasured: "grid point 8 N·s: host trouble"}
		}
		m := FromMargins("margins", sc, []batch.AxisMargin{
			{Axis: "friction", Unit: "× μ_s", Limit: friction, Tolerance: 0.0119, Reached: true, Meets: true}, push}, GreetingOf(""), rev)
		if err := s.Add(ctx, &m); err != nil {
			t.Fatal(err)
		}
		st := FromStability("stability", sc, batch.StabilityReport{SpectralRadius: 0.61, RadiusLow: 0.58, RadiusHigh: 0.66, Stable: true,
			Eigenvalues: []batch.Eigen{{Re: -0.2, Im: 0.58, Modulus: 0.61}, {Re: -0.2, Im: -0.58, Modulus: 0.61}, {Re: 0.1, Modulus: 0.1}}}, GreetingOf(""), rev)
		if err := s.Add(ctx, &st); err != nil {
			t.Fatal(err)
		}
	}
}

// TestEnvelopeStoredAndTrended stores margins and stability estimates
// next to runs (SQLite, and PostgreSQL when there is one), reads them
// back as stored (a not-measured limit as NaN), and follows them: the run
// figures from the runs only, one trend per margin axis and one of the
// spectral radius, the friction margin flagged as drifting.
func TestEnvelopeStoredAndTrended(t *testing.T) {
	ctx := context.Background()
	for name, s := range stores(t) {
		t.Run(name, func(t *testing.T) {
			envelopeBuilds(t, s)
			rs, err := s.Series(ctx, "level-demo", 0)
			if err != nil {
				t.Fatal(err)
			}
			if len(rs) != 24 {
				t.Fatalf("%d results, want 24", len(rs))
			}
			m, st := rs[1], rs[2]
			if m.Command != "margins" || m.Margins["friction"].Limit != 0.36 || m.Margins["friction"].Resolution != 0.0119 || m.Margins["friction"].Unit != "× μ_s" ||
				m.Stability != nil || !math.IsNaN(m.MeanSpeedMPS) || m.Outcome != "pass" {
				t.Errorf("margins read back %+v", m)
			}
			if u := rs[19].Margins["push_backward_late"]; !math.IsNaN(u.Limit) || u.NotMeasured == "" || rs[19].Outcome != "invalid" {
				t.Errorf("a not-measured axis read back %+v (outcome %s)", u, rs[19].Outcome)
			}
			if st.Stability == nil || st.Stability.SpectralRadius != 0.61 || st.Stability.RadiusHigh != 0.66 || len(st.Stability.Eigenvalues) != 3 ||
				st.Stability.Eigenvalues[1] != [2]float64{-0.2, -0.58} || st.Margins != nil {
				t.Errorf("stability read back %+v", st.Stability)
			}
			if rs[0].Envelope() || rs[0].Margins != nil || rs[0].Stability != nil {
				t.Errorf("a run's result read back with an envelope: %+v", rs[0])
			}
			trends := Trends(rs, nil, batch.DefaultTolerances, 5)
			byName := map[string]Trend{}
			var names []string
			for _, tr := range trends {
				byName[tr.Name] = tr
				names = append(names, tr.Name)
			}
			if got := strings.Join(names[len(Figures):], ","); got != "margin_friction,margin_push_backward_late,spectral_radius" {
				t.Fatalf("envelope trends %s", got)
			}
			if n := len(byName["steps"].Points); n != 8 {
				t.Errorf("steps trend over %d results, want the 8 runs", n)
			}
			f := byName["margin_friction"]
			if !f.Drift || math.Abs(f.DriftTotal-0.04) > 1e-12 || f.Reference != 0.36 || f.Tolerance != 0.0119 || len(f.Points) != 8 {
				t.Errorf("friction margin: %+v", f)
			}
			p := byName["margin_push_backward_late"]
			if p.Drift || len(p.Points) != 8 || !math.IsNaN(p.Points[6].Value) {
				t.Errorf("push margin: %+v", p)
			}
			if r := byName["spectral_radius"]; r.Drift || r.Reference != 0.61 || math.Abs(r.Tolerance-0.04) > 1e-12 || len(r.Points) != 8 {
				t.Errorf("spectral radius: %+v", r)
			}
		})
	}
}

// TestSchema1DatabaseIsMigrated opens a database written by a build that
// knew schema 1 only: its rows read back without an envelope, and
// envelope rows can be added next to them.
func TestSchema1DatabaseIsMigrated(t *testing.T) {
	ctx := context.Background()
	for name, s := range stores(t) {
		t.Run(name, func(t *testing.T) {
			// Take it back to what schema 1 left: the first migration only.
			for _, stmt := range []string{"DROP TABLE gaitrig_results", "DELETE FROM gaitrig_schema"} {
				if _, err := s.db.ExecContext(ctx, stmt); err != nil {
					t.Fatal(err)
				}
			}
			for _, stmt := range strings.Split(migrations(s.postgres)[0], ";") {
				if _, err := s.db.ExecContext(ctx, stmt); err != nil {
					t.Fatal(err)
				}
			}
			for _, stmt := range []string{"INSERT INTO gaitrig_schema (version) VALUES (1)",
				`INSERT INTO gaitrig_results (recorded_at, command, scenario, scenario_sha256, firmware_name, firmware_build, firmware_revision,
		tool_version, host, outcome, reason, steps, mean_speed_mps, alarms) VALUES ('2026-01-02T03:04:05Z', 'suite', 'level-demo', '', '', 'b1', '', '', '', 'pass', '', 30, 0.78, '{}')`} {
				if _, err := s.db.ExecContext(ctx, stmt); err != nil {
					t.Fatal(err)
				}
			}
			if v, err := s.Version(ctx); err != nil || v != 1 {
				t.Fatalf("set-up: version %d, %v", v, err)
			}
			again, err := Open(ctx, s.DSN) // no password in the test DSNs: DSN is the one opened
			if err != nil {
				t.Fatal(err)
			}
			defer again.Close()
			if v, err := again.Version(ctx); err != nil || v != 2 {
				t.Fatalf("version %d, %v: want 2", v, err)
			}
			sc, _ := scenarios.LoadBuiltin("level-demo")
			m := FromMargins("margins", sc, []batch.AxisMargin{{Axis: "friction", Unit: "× μ_s", Limit: 0.36, Tolerance: 0.0119, Meets: true}}, GreetingOf(""), "r2")
			if err := again.Add(ctx, &m); err != nil {
				t.Fatal(err)
			}
			rs, err := again.Series(ctx, "level-demo", 0)
			if err != nil || len(rs) != 2 || rs[0].Envelope() || rs[0].Steps != 30 || rs[1].Margins["friction"].Limit != 0.36 {
				t.Fatalf("%+v, %v", rs, err)
			}
		})
	}
}

// TestTrendPageShowsTheEnvelope: the trend page draws the margins and the
// spectral radius when the history has them, with the drifting margin
// flagged.
func TestTrendPageShowsTheEnvelope(t *testing.T) {
	s, err := Open(context.Background(), "sqlite:"+filepath.Join(t.TempDir(), "h.db"))
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	envelopeBuilds(t, s)
	rs, err := s.Series(context.Background(), "level-demo", 0)
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "history.html")
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := WritePage(f, Page{Scenario: "level-demo", Builds: 8, K: 5, Trends: Trends(rs, nil, batch.DefaultTolerances, 5)}); err != nil {
		t.Fatal(err)
	}
	f.Close()
	doc := browsertest.DOM(t, path)
	dots := map[string]int{}
	for _, svg := range browsertest.FindAll(doc, "svg") {
		dots[browsertest.Attr(svg, "data-figure")] = len(browsertest.FindAll(svg, "circle"))
	}
	// The push margin has a gap where it was not measured.
	if dots["margin_friction"] != 8 || dots["margin_push_backward_late"] != 7 || dots["spectral_radius"] != 8 {
		t.Errorf("dots per envelope figure %v", dots)
	}
	var flags []string
	for _, sp := range browsertest.FindAll(doc, "span") {
		if browsertest.Attr(sp, "class") == "drift" {
			flags = append(flags, browsertest.Text(sp))
		}
	}
	if len(flags) != 1 || !strings.Contains(browsertest.Text(doc), "margin friction, × μ_s") {
		t.Errorf("drift flags %q, want one on the friction margin", flags)
	}
}
