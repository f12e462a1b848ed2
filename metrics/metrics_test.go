package metrics_test

import (
	"context"
	"math"
	"net/http"
	"path/filepath"
	"strings"
	"testing"
	"time"

	dto "github.com/prometheus/client_model/go"
	"github.com/prometheus/common/expfmt"

	"gaitrig/hil"
	"gaitrig/metrics"
	"gaitrig/record"
	"gaitrig/rig"
	"gaitrig/scenarios"
)

var client = &http.Client{Timeout: 20 * time.Second}

// scrape fetches and parses the endpoint with the Prometheus text parser.
func scrape(t *testing.T, url string) map[string]*dto.MetricFamily {
	t.Helper()
	resp, err := client.Get(url)
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	if resp.StatusCode != 200 {
		t.Fatalf("GET %s: %s", url, resp.Status)
	}
	var p expfmt.TextParser
	mf, err := p.TextToMetricFamilies(resp.Body)
	if err != nil {
		t.Fatalf("the endpoint's text does not parse: %v", err)
	}
	return mf
}

// value is the value of the series of family name whose labels include
// want (pairs name, value); NaN when there is none.
func value(mf map[string]*dto.MetricFamily, name string, want ...string) float64 {
	f := mf[name]
	if f == nil {
		return math.NaN()
	}
next:
	for _, m := range f.Metric {
		for i := 0; i+1 < len(want); i += 2 {
			found := false
			for _, l := range m.Label {
				if l.GetName() == want[i] && l.GetValue() == want[i+1] {
					found = true
				}
			}
			if !found {
				continue next
			}
		}
		switch {
		case m.Counter != nil:
			return m.Counter.GetValue()
		case m.Gauge != nil:
			return m.Gauge.GetValue()
		}
	}
	return math.NaN()
}

// TestMetricsDuringAndAfterARun scrapes a wall-clock run of the demo while
// it goes and after it ends, parses the text with the Prometheus parser,
// and checks the figures against the run's own record: summary.json for
// ticks, steps, misses and alarms, and telemetry.csv, bucketed here, for
// the round-trip histogram.
func TestMetricsDuringAndAfterARun(t *testing.T) {
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	tap := hil.NewTap(0, false)
	ex, err := metrics.New(metrics.Config{Scenario: sc.Name, Rig: "bench"}, tap)
	if err != nil {
		t.Fatal(err)
	}
	defer ex.Close()
	dir := filepath.Join(t.TempDir(), "run")
	o := rig.Options{Link: "builtin", RunDir: dir, Clock: hil.Wallclock, Duration: 3, MaxSteps: -1, Tap: tap, RealtimePriority: -1}
	done := make(chan rig.Result, 1)
	go func() {
		r, err := rig.Run(context.Background(), sc, o)
		if err != nil {
			t.Error(err)
		}
		done <- r
	}()
	// During the run: scrape until ticks show (the run is 3 s of wall
	// clock; the scrapes are counted, not timed).
	var during map[string]*dto.MetricFamily
	var res rig.Result
	ended := false
	for i := 0; i < 400 && !ended; i++ {
		during = scrape(t, ex.URL())
		if v := value(during, "gaitrig_ticks_total"); v > 0 && value(during, "gaitrig_run_outcome", "outcome", "running") == 1 {
			break
		}
		select {
		case res = <-done:
			ended = true
		case <-time.After(10 * time.Millisecond):
		}
	}
	if ended {
		t.Log("the run ended before a scrape saw it running (a very busy host); checking the end only")
	} else {
		for name, typ := range map[string]dto.MetricType{
			"gaitrig_ticks_total": dto.MetricType_COUNTER, "gaitrig_deadline_misses_total": dto.MetricType_COUNTER,
			"gaitrig_states_resent_total": dto.MetricType_COUNTER, "gaitrig_steps_total": dto.MetricType_COUNTER,
			"gaitrig_round_trip_seconds": dto.MetricType_HISTOGRAM, "gaitrig_tick_jitter_seconds": dto.MetricType_HISTOGRAM,
			"gaitrig_friction_utilization_ratio": dto.MetricType_GAUGE, "gaitrig_normal_force_newtons": dto.MetricType_GAUGE,
			"gaitrig_run_outcome": dto.MetricType_GAUGE, "gaitrig_simulated_seconds": dto.MetricType_GAUGE,
		} {
			f := during[name]
			if f == nil || f.GetType() != typ {
				t.Errorf("during the run: %s missing or not a %v", name, typ)
			}
		}
		if n := value(during, "gaitrig_normal_force_newtons", "foot", "left") + value(during, "gaitrig_normal_force_newtons", "foot", "right"); !(n > 0) {
			t.Errorf("during the run the feet carry %v N in all", n)
		}
		res = <-done
	}
	ex.Finish(&res.Summary)
	after := scrape(t, ex.URL())
	s := res.Summary
	for _, c := range []struct {
		name string
		want float64
	}{
		{"gaitrig_ticks_total", float64(s.Ticks)},
		{"gaitrig_steps_total", float64(s.Steps)},
		{"gaitrig_deadline_misses_total", float64(s.DeadlineMisses)},
		{"gaitrig_simulated_seconds", s.SimTimeS},
	} {
		if got := value(after, c.name, "scenario", "level-demo", "rig", "bench"); got != c.want {
			t.Errorf("%s = %v after the run, the summary says %v", c.name, got, c.want)
		}
	}
	for _, o := range metrics.Outcomes {
		want := 0.0
		if o == string(s.Outcome) {
			want = 1
		}
		if got := value(after, "gaitrig_run_outcome", "outcome", o); got != want {
			t.Errorf("gaitrig_run_outcome{outcome=%q} = %v, want %v (outcome %s)", o, got, want, s.Outcome)
		}
	}
	for kind, n := range s.Alarms {
		got := 0.0
		for _, m := range after["gaitrig_alarms_total"].GetMetric() {
			for _, l := range m.Label {
				if l.GetName() == "kind" && l.GetValue() == kind {
					got += m.Counter.GetValue()
				}
			}
		}
		if got != float64(n) {
			t.Errorf("gaitrig_alarms_total{kind=%q} = %v, the summary counts %d", kind, got, n)
		}
	}
	// The round-trip histogram against telemetry.csv, bucketed here.
	run, err := record.Open(dir)
	if err != nil {
		t.Fatal(err)
	}
	tr, err := run.Ticks()
	if err != nil {
		t.Fatal(err)
	}
	bounds := []float64{50, 100, 200, 300, 500, 750, 1000, 1500, 2000, 3000, 5000, 10000, 20000} // µs, as documented
	cum := make([]uint64, len(bounds))
	var count uint64
	var sum float64
	for tr.Next() {
		us := tr.Tick().LatencyUS
		if math.IsNaN(us) {
			continue
		}
		count++
		sum += us / 1e6
		for i, b := range bounds {
			if us <= b {
				cum[i]++
			}
		}
	}
	if err := tr.Err(); err != nil {
		t.Fatal(err)
	}
	h := after["gaitrig_round_trip_seconds"].GetMetric()[0].GetHistogram()
	if h.GetSampleCount() != count || math.Abs(h.GetSampleSum()-sum) > 1e-9*math.Max(1, sum) {
		t.Errorf("round trip histogram: %d samples summing %v s; telemetry.csv has %d summing %v s", h.GetSampleCount(), h.GetSampleSum(), count, sum)
	}
	if count == 0 {
		t.Error("a wall-clock run logged no round trip")
	}
	for i, b := range h.GetBucket() {
		if i >= len(bounds) {
			if !math.IsInf(b.GetUpperBound(), 1) || b.GetCumulativeCount() != count {
				t.Errorf("last bucket: le %v count %d, want +Inf and %d", b.GetUpperBound(), b.GetCumulativeCount(), count)
			}
			continue
		}
		if want := bounds[i] / 1e6; b.GetUpperBound() != want || b.GetCumulativeCount() != cum[i] {
			t.Errorf("bucket %d: le %v count %d; telemetry.csv gives le %v count %d", i, b.GetUpperBound(), b.GetCumulativeCount(), want, cum[i])
		}
	}
	if j := after["gaitrig_tick_jitter_seconds"].GetMetric()[0].GetHistogram(); j.GetSampleCount() != res.Loop.Jitter.Count {
		t.Errorf("jitter histogram has %d samples, the loop's own jitter figures %d", j.GetSampleCount(), res.Loop.Jitter.Count)
	}
}

// A non-loopback address needs a token, and with a token the endpoint
// refuses a scrape without it.
func TestMetricsToken(t *testing.T) {
	tap := hil.NewTap(0, false)
	if _, err := metrics.New(metrics.Config{Addr: "0.0.0.0:0"}, tap); err == nil || !strings.Contains(err.Error(), "GAITRIG_VIEW_TOKEN") {
		t.Fatalf("0.0.0.0 without a token: %v", err)
	}
	ex, err := metrics.New(metrics.Config{Token: "t0k"}, tap)
	if err != nil {
		t.Fatal(err)
	}
	defer ex.Close()
	resp, err := client.Get(ex.URL())
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != 401 {
		t.Errorf("a scrape without the token got %d", resp.StatusCode)
	}
	req, _ := http.NewRequest("GET", ex.URL(), nil)
	req.Header.Set("Authorization", "Bearer t0k")
	resp, err = client.Do(req)
	if err != nil {
		t.Fatal(err)
	}
	resp.Body.Close()
	if resp.StatusCode != 200 {
		t.Errorf("a scrape with the token got %d", resp.StatusCode)
	}
}

// A run the host spoiled ends with outcome invalid; the outcome gauge says
// so, instead of showing no outcome at all.
func TestInvalidOutcomeIsExported(t *testing.T) {
	ex, err := metrics.New(metrics.Config{}, hil.NewTap(0, false))
	if err != nil {
		t.Fatal(err)
	}
	defer ex.Close()
	ex.Finish(&record.Summary{Outcome: record.Invalid})
	after := scrape(t, ex.URL())
	if got := value(after, "gaitrig_run_outcome", "outcome", string(record.Invalid)); got != 1 {
		t.Errorf("gaitrig_run_outcome{outcome=\"invalid\"} = %v after an invalid run, want 1", got)
	}
	ones := 0
	for _, m := range after["gaitrig_run_outcome"].GetMetric() {
		if m.GetGauge().GetValue() == 1 {
			ones++
		}
	}
	if ones != 1 {
		t.Errorf("%d outcome series at 1, want exactly one", ones)
	}
}

// TestFinalValuesLingerUntilScraped: a run usually ends between two
// scrapes. After Finish the endpoint keeps serving the final values; a
// scrape after the run reads the outcome and the summary's figures, and
// that scrape (an event, not a clock) ends Linger, after which the
// endpoint is closed. Linger without a scrape ends at its bound or with
// its context, saying no scrape read the values.
func TestFinalValuesLingerUntilScraped(t *testing.T) {
	sc, err := scenarios.LoadBuiltin("level-demo")
	if err != nil {
		t.Fatal(err)
	}
	tap := hil.NewTap(0, false)
	ex, err := metrics.New(metrics.Config{Scenario: sc.Name}, tap)
	if err != nil {
		t.Fatal(err)
	}
	defer ex.Close()
	if ex.Linger(context.Background(), time.Hour) {
		t.Fatal("Linger before Finish says the final values were read")
	}
	res, err := rig.Run(context.Background(), sc, rig.Options{Link: "builtin", NoRecord: true, Duration: 2, MaxSteps: -1, Tap: tap})
	if err != nil {
		t.Fatal(err)
	}
	ex.Finish(&res.Summary)
	lingered := make(chan bool, 1)
	go func() { lingered <- ex.Linger(context.Background(), time.Hour) }()
	after := scrape(t, ex.URL())
	if got := value(after, "gaitrig_run_outcome", "outcome", string(res.Summary.Outcome)); got != 1 {
		t.Errorf("a scrape after the run: gaitrig_run_outcome{outcome=%q} = %v, want 1", res.Summary.Outcome, got)
	}
	if got := value(after, "gaitrig_ticks_total"); got != float64(res.Summary.Ticks) {
		t.Errorf("a scrape after the run: %v ticks, the summary says %d", got, res.Summary.Ticks)
	}
	select {
	case read := <-lingered:
		if !read {
			t.Error("Linger ended without noticing the scrape")
		}
	case <-time.After(time.Minute): // bounds a hang; the scrape ends Linger
		t.Fatal("Linger still waiting after a scrape read the final values")
	}
	if err := ex.Close(); err != nil {
		t.Fatal(err)
	}
	if resp, err := client.Get(ex.URL()); err == nil {
		resp.Body.Close()
		t.Error("the endpoint still answers after Close")
	}

	// Without a scrape: the bound, or the context, ends it.
	ex2, err := metrics.New(metrics.Config{}, hil.NewTap(0, false))
	if err != nil {
		t.Fatal(err)
	}
	defer ex2.Close()
	ex2.Finish(nil)
	if ex2.Linger(context.Background(), time.Millisecond) {
		t.Error("Linger reports a scrape that never came")
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if ex2.Linger(ctx, time.Hour) {
		t.Error("Linger with an ended context reports a scrape that never came")
	}
	if got := value(scrape(t, ex2.URL()), "gaitrig_run_outcome", "outcome", string(record.Aborted)); got != 1 {
		t.Errorf("a run finished without a summary shows aborted = %v", got)
	}
	if !ex2.Linger(context.Background(), time.Hour) {
		t.Error("Linger after the final values were scraped does not say so")
	}
}
