// Package metrics exposes a running loop as Prometheus metrics, for lab
// dashboards: ticks, deadline misses, round-trip and jitter histograms,
// states resent, rejected frames by kind, alarms by kind and severity,
// the current friction utilization and normal force of each foot, steps,
// and the run's outcome.
//
// Values come from a reader of the loop's hil.Tap, read when Prometheus
// scrapes: nothing is added to the tick path beyond the tap itself. The
// histograms count every tick (the tap keeps them), the gauges show the
// latest snapshot (at most 1/50 s of simulated time old).
//
// A run usually ends between two scrapes. So that a dashboard still gets
// the outcome, the command keeps the endpoint up after the run with the
// final values (Finish, then Linger) until one scrape has read them, for
// at most DefaultLinger unless told otherwise, and then closes it.
package metrics

import (
	"context"
	"crypto/subtle"
	"errors"
	"fmt"
	"net"
	"net/http"
	"sync"
	"time"

	"github.com/prometheus/client_golang/prometheus"
	"github.com/prometheus/client_golang/prometheus/promhttp"

	"gaitrig/hil"
	"gaitrig/record"
	"gaitrig/view"
)

// DefaultAddr is where the metrics listen when no address is given.
const DefaultAddr = "127.0.0.1:0"

// Path is the path of the metrics endpoint.
const Path = "/metrics"

// DefaultLinger is how long the endpoint waits after the run, at most, for
// a scrape to read the final values: Prometheus's default scrape interval
// (scrape_interval 1m, from memory of its configuration reference), so a
// server with default settings scrapes at least once in it.
const DefaultLinger = time.Minute

// closeWait bounds how long Close lets a scrape being answered finish: the
// answer is a few kilobytes, so only a host stalled for seconds hits it.
const closeWait = 5 * time.Second

// Config says where the metrics are served and what labels every series
// carries.
type Config struct {
	// Addr is host:port; "" is DefaultAddr. An address that is not loopback
	// needs Token (the same rule and variable as the live view,
	// view.TokenEnv); Prometheus sends it as a bearer token.
	Addr  string
	Token string // bearer token a scraper must send; "" for none (loopback only)
	// Scenario and Rig are constant labels of every series.
	Scenario, Rig string
}

// Exporter serves the metrics of one run.
type Exporter struct {
	ln  net.Listener
	srv *http.Server

	mu      sync.Mutex
	rd      *hil.TapReader
	snap    hil.Snapshot
	outcome string // "" while running

	finalRead chan struct{} // closed by the first scrape after Finish
	finalOnce sync.Once

	descs descs
}

// Outcomes are the values of the outcome label of gaitrig_run_outcome.
var Outcomes = []string{"running", string(record.Pass), string(record.Fail), string(record.Tripped), string(record.Aborted), string(record.Invalid)}

type descs struct {
	ticks, misses, resent, steps, frameErrors, alarms *prometheus.Desc
	roundTrip, jitter                                 *prometheus.Desc
	utilization, normal, simTime, outcome             *prometheus.Desc
}

// New adds a reader to tap (call it before the run starts) and serves the
// metrics on cfg.Addr.
func New(cfg Config, tap *hil.Tap) (*Exporter, error) {
	if cfg.Addr == "" {
		cfg.Addr = DefaultAddr
	}
	host, _, err := net.SplitHostPort(cfg.Addr)
	if err != nil {
		return nil, fmt.Errorf("metrics address %q: want HOST:PORT (%v)", cfg.Addr, err)
	}
	if !view.IsLoopback(host) && cfg.Token == "" {
		return nil, fmt.Errorf("metrics address %q is not loopback: set %s to an access token first (Prometheus sends it as bearer_token)", cfg.Addr, view.TokenEnv)
	}
	labels := prometheus.Labels{"scenario": cfg.Scenario}
	if cfg.Rig != "" {
		labels["rig"] = cfg.Rig
	}
	d := func(name, help string, variable ...string) *prometheus.Desc {
		return prometheus.NewDesc("gaitrig_"+name, help, variable, labels)
	}
	e := &Exporter{rd: tap.NewReader(), finalRead: make(chan struct{}), descs: descs{
		ticks:       d("ticks_total", "Ticks the loop has run."),
		misses:      d("deadline_misses_total", "Wall-clock ticks whose work ended after the next tick was due."),
		resent:      d("states_resent_total", "Lockstep states sent again because no reply came in time."),
		steps:       d("steps_total", "Steps completed (heel strike to heel strike)."),
		frameErrors: d("frame_errors_total", "Frames the link rejected, by kind of rejection.", "kind"),
		alarms:      d("alarms_total", "Alarm occurrences (logged or counted), by kind and severity.", "kind", "severity"),
		roundTrip:   d("round_trip_seconds", "Command round trip, state sent to its command taken (wall-clock runs)."),
		jitter:      d("tick_jitter_seconds", "How late each tick started (wall-clock runs)."),
		utilization: d("friction_utilization_ratio", "Friction utilization |F_t|/(mu_s N) of each foot at the latest snapshot; 1 is the slip limit.", "foot"),
		normal:      d("normal_force_newtons", "Normal force of the ground on each foot at the latest snapshot.", "foot"),
		simTime:     d("simulated_seconds", "Simulated time of the latest snapshot."),
		outcome:     d("run_outcome", "1 for the run's outcome (running until it ends), 0 for the others.", "outcome"),
	}}
	reg := prometheus.NewRegistry()
	if err := reg.Register(e); err != nil {
		return nil, err
	}
	mux := http.NewServeMux()
	h := promhttp.HandlerFor(reg, promhttp.HandlerOpts{ErrorHandling: promhttp.ContinueOnError, MaxRequestsInFlight: 4, Timeout: 10 * time.Second})
	if cfg.Token != "" {
		h = bearer(cfg.Token, h)
	}
	mux.Handle("GET "+Path, h)
	ln, err := net.Listen("tcp", cfg.Addr)
	if err != nil {
		return nil, fmt.Errorf("metrics: %w", err)
	}
	e.ln = ln
	e.srv = &http.Server{Handler: mux, ReadHeaderTimeout: 5 * time.Second, MaxHeaderBytes: 16 << 10}
	go e.srv.Serve(ln)
	return e, nil
}

func bearer(token string, h http.Handler) http.Handler {
	want := []byte("Bearer " + token)
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if subtle.ConstantTimeCompare([]byte(r.Header.Get("Authorization")), want) != 1 {
			http.Error(w, "metrics need the bearer token (the value of "+view.TokenEnv+" on the rig)", http.StatusUnauthorized)
			return
		}
		h.ServeHTTP(w, r)
	})
}

// URL is the address of the metrics endpoint.
func (e *Exporter) URL() string { return "http://" + e.ln.Addr().String() + Path }

// Finish sets the run's outcome from its summary (nil: aborted before it
// had one).
func (e *Exporter) Finish(sum *record.Summary) {
	e.mu.Lock()
	defer e.mu.Unlock()
	e.outcome = string(record.Aborted)
	if sum != nil {
		e.outcome = string(sum.Outcome)
	}
}

// Linger keeps serving the final values set by Finish until one scrape has
// read them, at most max (≤ 0: not at all), or until ctx ends; it reports
// whether a scrape read them. Before Finish it returns false at once.
func (e *Exporter) Linger(ctx context.Context, max time.Duration) bool {
	e.mu.Lock()
	finished := e.outcome != ""
	e.mu.Unlock()
	if !finished || max <= 0 {
		return false
	}
	t := time.NewTimer(max)
	defer t.Stop()
	select {
	case <-e.finalRead:
		return true
	case <-t.C:
	case <-ctx.Done():
	}
	select { // a scrape that came with the deadline still counts
	case <-e.finalRead:
		return true
	default:
		return false
	}
}

// Close stops serving; a scrape being answered is finished first (for at
// most closeWait).
func (e *Exporter) Close() error {
	ctx, cancel := context.WithTimeout(context.Background(), closeWait)
	defer cancel()
	err := e.srv.Shutdown(ctx)
	if errors.Is(err, context.DeadlineExceeded) {
		err = e.srv.Close()
	}
	return err
}

// Describe implements prometheus.Collector.
func (e *Exporter) Describe(ch chan<- *prometheus.Desc) {
	d := &e.descs
	for _, x := range []*prometheus.Desc{d.ticks, d.misses, d.resent, d.steps, d.frameErrors, d.alarms, d.roundTrip, d.jitter,
		d.utilization, d.normal, d.simTime, d.outcome} {
		ch <- x
	}
}

// Collect implements prometheus.Collector: it takes the newest snapshot.
func (e *Exporter) Collect(ch chan<- prometheus.Metric) {
	e.mu.Lock()
	e.rd.Latest(&e.snap)
	s := e.snap // a copy: the scrape encodes after the lock is released
	outcome := e.outcome
	e.mu.Unlock()
	if outcome != "" {
		e.finalOnce.Do(func() { close(e.finalRead) })
	}
	d := &e.descs
	counter := func(desc *prometheus.Desc, v float64, labels ...string) {
		ch <- prometheus.MustNewConstMetric(desc, prometheus.CounterValue, v, labels...)
	}
	gauge := func(desc *prometheus.Desc, v float64, labels ...string) {
		ch <- prometheus.MustNewConstMetric(desc, prometheus.GaugeValue, v, labels...)
	}
	counter(d.ticks, float64(s.Ticks))
	counter(d.misses, float64(s.DeadlineMisses))
	counter(d.resent, float64(s.Resent))
	counter(d.steps, float64(s.Steps))
	for _, k := range s.FrameKinds[:s.NumFrameKinds] {
		counter(d.frameErrors, float64(k.N), k.Kind)
	}
	for _, a := range s.Alarms[:s.NumAlarmKinds] {
		counter(d.alarms, float64(a.N), a.Kind, string(a.Severity))
	}
	ch <- histogram(d.roundTrip, &s.Latency)
	ch <- histogram(d.jitter, &s.Jitter)
	for i, foot := range record.FootNames {
		gauge(d.utilization, s.Feet[i].Utilization, foot)
		gauge(d.normal, s.Feet[i].Normal, foot)
	}
	gauge(d.simTime, s.T)
	if outcome == "" {
		outcome = "running"
	}
	for _, o := range Outcomes {
		v := 0.0
		if o == outcome {
			v = 1
		}
		gauge(d.outcome, v, o)
	}
}

// histogram turns the tap's µs buckets into a Prometheus histogram in
// seconds with cumulative bucket counts.
func histogram(desc *prometheus.Desc, h *hil.TapHistogram) prometheus.Metric {
	buckets := make(map[float64]uint64, len(hil.TapBucketsUS))
	var cum uint64
	for i, ub := range hil.TapBucketsUS {
		cum += h.Counts[i]
		buckets[ub/1e6] = cum
	}
	return prometheus.MustNewConstHistogram(desc, h.Count, h.SumUS/1e6, buckets)
}
