// Package history keeps the result of every run in a database, so a
// nightly rig can follow each figure across firmware builds: SQLite in a
// file (modernc.org/sqlite, pure Go, so the binary stays static) or a
// shared PostgreSQL (github.com/jackc/pgx/v5). The schema is versioned and
// migrated by Open. Trend and drift over the stored results are in
// trend.go; the trend page in page.go.
package history

import (
	"context"
	"database/sql"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"sort"
	"strings"
	"time"

	_ "github.com/jackc/pgx/v5/stdlib" // registers the "pgx" database/sql driver
	_ "modernc.org/sqlite"             // registers the "sqlite" database/sql driver

	"gaitrig/rig"
)

// EnvDSN is the environment variable a --history DSN is read from when the
// flag is not given.
const EnvDSN = "GAITRIG_HISTORY"

// EnvRevision is the environment variable the firmware revision (a
// version-control revision of the firmware's source) is read from when
// --firmware-revision is not given.
const EnvRevision = "GAITRIG_FIRMWARE_REVISION"

// SchemaVersion is the newest schema this build writes; Open migrates an
// older database up to it and refuses a newer one.
const SchemaVersion = 2

// Result is one stored run.
type Result struct {
	ID               int64          `json:"id"`                        // order of storing: the order of builds
	RecordedAt       time.Time      `json:"recorded_at"`               // when it was stored, UTC
	Command          string         `json:"command"`                   // run or suite
	Scenario         string         `json:"scenario"`                  // scenario name
	ScenarioSHA256   string         `json:"scenario_sha256"`           // SHA-256 of the scenario file's bytes
	FirmwareName     string         `json:"firmware_name"`             // from the firmware's greeting
	FirmwareBuild    string         `json:"firmware_build"`            // from the firmware's greeting
	FirmwareRevision string         `json:"firmware_revision"`         // --firmware-revision or GAITRIG_FIRMWARE_REVISION
	ToolVersion      string         `json:"tool_version"`              // gaitrig's version
	Host             string         `json:"host"`                      // the machine's host name
	Outcome          string         `json:"outcome"`                   // pass, fail, tripped, aborted or invalid
	Reason           string         `json:"reason,omitempty"`          // why it failed, tripped or was aborted
	Steps            int            `json:"steps"`                     // heel strikes completed
	MeanSpeedMPS     float64        `json:"mean_speed_mps"`            // mean forward speed over the steps, m/s
	PeakFriction     float64        `json:"peak_friction_utilization"` // peak friction utilization of a stance foot
	MinNormalForceN  float64        `json:"min_normal_force_n"`        // least stance-foot normal force, N
	LatencyP50US     float64        `json:"latency_p50_us"`            // NaN (null) when not measured (lockstep)
	LatencyP99US     float64        `json:"latency_p99_us"`            // NaN (null) when not measured (lockstep)
	LatencyMaxUS     float64        `json:"latency_max_us"`            // NaN (null) when not measured (lockstep)
	Alarms           map[string]int `json:"alarms,omitempty"`          // count per alarm kind
	// Margins are the limits of a margin search (gaitrig margins, or the
	// envelope of gaitrig preflight) by axis; nil for a run's result.
	// Since schema 2.
	Margins map[string]Margin `json:"margins,omitempty"`
	// Stability is the closed-loop stability estimate (gaitrig stability,
	// or the envelope of gaitrig preflight); nil for a run's result.
	// Since schema 2.
	Stability *Stability `json:"stability,omitempty"`
}

// Envelope reports whether r holds an envelope result (margins or a
// stability estimate) rather than a run's figures: the trend takes each
// figure only from the results that have it.
func (r Result) Envelope() bool { return r.Margins != nil || r.Stability != nil }

// Margin is one axis's limit as stored.
type Margin struct {
	// Limit is the last passing value, in Unit; NaN (null) when the axis
	// was not measured.
	Limit float64 `json:"limit"`
	// Resolution is the width of the bracket the search stopped at, in
	// Unit: a change smaller than it is below what the search resolves.
	Resolution float64 `json:"resolution"`
	Unit       string  `json:"unit"` // unit of Limit and Resolution
	// Reached is false when every value up to the end of the range passed
	// (Limit is then the range's end, a lower bound).
	Reached bool `json:"reached"`
	// NotMeasured says why the axis has no limit (the host spoiled a run
	// it needed).
	NotMeasured string `json:"not_measured,omitempty"`
}

// Stability is a stability estimate as stored.
type Stability struct {
	SpectralRadius float64 `json:"spectral_radius"` // largest eigenvalue modulus of the fitted step-to-step map
	// RadiusLow and RadiusHigh bound its 95 % bootstrap interval.
	RadiusLow  float64 `json:"spectral_radius_low"`
	RadiusHigh float64 `json:"spectral_radius_high"` // upper end of the 95 % bootstrap interval
	// Eigenvalues are the fitted map's, largest modulus first, as
	// (real, imaginary) pairs.
	Eigenvalues [][2]float64 `json:"eigenvalues"`
}

// Store is an open history database.
type Store struct {
	db       *sql.DB
	postgres bool
	// DSN is the database as given to Open (a PostgreSQL password is
	// not kept here: see redact).
	DSN string
}

// Open opens (creating it if need be) the history database named by dsn:
// "sqlite:PATH" or "postgres://…" / "postgresql://…" (a libpq URL), and
// migrates its schema to SchemaVersion. A dsn of another form, a database
// that cannot be reached, or one with a newer schema wraps rig.ErrConfig.
func Open(ctx context.Context, dsn string) (*Store, error) {
	var s Store
	var driver, source string
	switch {
	case strings.HasPrefix(dsn, "sqlite:"):
		path := strings.TrimPrefix(dsn, "sqlite:")
		if path == "" {
			return nil, rig.Configf("history %q: want sqlite:PATH", dsn)
		}
		// A writer waits for another (two shards on one file) instead of
		// failing at once; transactions take the write lock at their
		// start, so a migration cannot be overtaken between its read and
		// its write.
		driver, source = "sqlite", "file:"+path+"?_pragma=busy_timeout(20000)&_pragma=journal_mode(WAL)&_txlock=immediate"
	case strings.HasPrefix(dsn, "postgres://"), strings.HasPrefix(dsn, "postgresql://"):
		driver, source, s.postgres = "pgx", dsn, true
	default:
		return nil, rig.Configf("history %q: want sqlite:PATH or postgres://USER@HOST/DB", redact(dsn))
	}
	s.DSN = redact(dsn)
	db, err := sql.Open(driver, source)
	if err != nil {
		return nil, rig.Configf("history %s: %v", s.DSN, err)
	}
	s.db = db
	if err := s.migrate(ctx); err != nil {
		db.Close()
		return nil, rig.Configf("history %s: %v", s.DSN, err)
	}
	return &s, nil
}

// redact hides the password of a URL-form DSN, for messages.
func redact(dsn string) string {
	scheme, rest, ok := strings.Cut(dsn, "://")
	if !ok {
		return dsn
	}
	cred, host, ok := strings.Cut(rest, "@")
	if !ok {
		return dsn
	}
	if user, _, hasPass := strings.Cut(cred, ":"); hasPass {
		return scheme + "://" + user + ":xxx@" + host
	}
	return dsn
}

// Close closes the database.
func (s *Store) Close() error { return s.db.Close() }

// migrations[i] takes the schema from version i to i+1. The id column is
// the one place the two databases differ.
func migrations(postgres bool) []string {
	id := "INTEGER PRIMARY KEY AUTOINCREMENT"
	if postgres {
		id = "BIGSERIAL PRIMARY KEY"
	}
	return []string{
		`CREATE TABLE gaitrig_results (
			id ` + id + `,
			recorded_at TEXT NOT NULL,
			command TEXT NOT NULL,
			scenario TEXT NOT NULL,
			scenario_sha256 TEXT NOT NULL,
			firmware_name TEXT NOT NULL,
			firmware_build TEXT NOT NULL,
			firmware_revision TEXT NOT NULL,
			tool_version TEXT NOT NULL,
			host TEXT NOT NULL,
			outcome TEXT NOT NULL,
			reason TEXT NOT NULL,
			steps INTEGER NOT NULL,
			mean_speed_mps DOUBLE PRECISION,
			peak_friction_utilization DOUBLE PRECISION,
			min_normal_force_n DOUBLE PRECISION,
			latency_p50_us DOUBLE PRECISION,
			latency_p99_us DOUBLE PRECISION,
			latency_max_us DOUBLE PRECISION,
			alarms TEXT NOT NULL);
		CREATE INDEX gaitrig_results_scenario ON gaitrig_results (scenario, id)`,
		// 2: the safety envelope (issue 10): margins by axis as JSON,
		// the spectral radius with its interval, the eigenvalues as JSON.
		// NULL for a run's result and for rows stored before.
		`ALTER TABLE gaitrig_results ADD COLUMN margins TEXT;
		ALTER TABLE gaitrig_results ADD COLUMN spectral_radius DOUBLE PRECISION;
		ALTER TABLE gaitrig_results ADD COLUMN spectral_radius_low DOUBLE PRECISION;
		ALTER TABLE gaitrig_results ADD COLUMN spectral_radius_high DOUBLE PRECISION;
		ALTER TABLE gaitrig_results ADD COLUMN eigenvalues TEXT`,
	}
}

// migrate brings the schema to SchemaVersion in one transaction.
func (s *Store) migrate(ctx context.Context) error {
	tx, err := s.db.BeginTx(ctx, nil)
	if err != nil {
		return err
	}
	defer tx.Rollback()
	if s.postgres {
		// Two shards opening a new database at once: one migrates, the
		// other waits and then finds it done.
		if _, err := tx.ExecContext(ctx, "SELECT pg_advisory_xact_lock(724531401)"); err != nil {
			return err
		}
	}
	if _, err := tx.ExecContext(ctx, "CREATE TABLE IF NOT EXISTS gaitrig_schema (version INTEGER NOT NULL)"); err != nil {
		return err
	}
	var have sql.NullInt64
	if err := tx.QueryRowContext(ctx, "SELECT MAX(version) FROM gaitrig_schema").Scan(&have); err != nil {
		return err
	}
	v := int(have.Int64)
	if v > SchemaVersion {
		return fmt.Errorf("the database has history schema version %d, this gaitrig knows up to %d: use a newer gaitrig", v, SchemaVersion)
	}
	ms := migrations(s.postgres)
	for ; v < SchemaVersion; v++ {
		for _, stmt := range strings.Split(ms[v], ";") {
			if strings.TrimSpace(stmt) == "" {
				continue
			}
			if _, err := tx.ExecContext(ctx, stmt); err != nil {
				return fmt.Errorf("migration to schema %d: %v", v+1, err)
			}
		}
		if _, err := tx.ExecContext(ctx, s.bind("INSERT INTO gaitrig_schema (version) VALUES (?)"), v+1); err != nil {
			return err
		}
	}
	return tx.Commit()
}

// bind turns ? placeholders into PostgreSQL's $1, $2, … (our queries have
// no ? inside text).
func (s *Store) bind(q string) string {
	if !s.postgres {
		return q
	}
	var b strings.Builder
	n := 0
	for _, r := range q {
		if r == '?' {
			n++
			fmt.Fprintf(&b, "$%d", n)
			continue
		}
		b.WriteRune(r)
	}
	return b.String()
}

// Version returns the schema version of the open database.
func (s *Store) Version(ctx context.Context) (int, error) {
	var v sql.NullInt64
	err := s.db.QueryRowContext(ctx, "SELECT MAX(version) FROM gaitrig_schema").Scan(&v)
	return int(v.Int64), err
}

// null stores a non-finite figure as NULL: databases differ on NaN.
func null(f float64) sql.NullFloat64 {
	if math.IsNaN(f) || math.IsInf(f, 0) {
		return sql.NullFloat64{}
	}
	return sql.NullFloat64{Float64: f, Valid: true}
}

// Add stores r (its ID and, when zero, RecordedAt are set here).
func (s *Store) Add(ctx context.Context, r *Result) error {
	if r.RecordedAt.IsZero() {
		r.RecordedAt = time.Now().UTC()
	}
	alarms, err := json.Marshal(r.Alarms)
	if err != nil {
		return err
	}
	var margins, eigen sql.NullString
	var radius [3]sql.NullFloat64
	if r.Margins != nil {
		b, err := json.Marshal(rig.JSONSafe(r.Margins)) // a not-measured limit as null
		if err != nil {
			return err
		}
		margins = sql.NullString{String: string(b), Valid: true}
	}
	if st := r.Stability; st != nil {
		b, err := json.Marshal(rig.JSONSafe(st.Eigenvalues))
		if err != nil {
			return err
		}
		eigen = sql.NullString{String: string(b), Valid: true}
		radius = [3]sql.NullFloat64{null(st.SpectralRadius), null(st.RadiusLow), null(st.RadiusHigh)}
	}
	q := `INSERT INTO gaitrig_results (recorded_at, command, scenario, scenario_sha256, firmware_name, firmware_build,
		firmware_revision, tool_version, host, outcome, reason, steps, mean_speed_mps, peak_friction_utilization,
		min_normal_force_n, latency_p50_us, latency_p99_us, latency_max_us, alarms,
		margins, spectral_radius, spectral_radius_low, spectral_radius_high, eigenvalues)
		VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)`
	args := []any{r.RecordedAt.UTC().Format(time.RFC3339Nano), r.Command, r.Scenario, r.ScenarioSHA256, r.FirmwareName, r.FirmwareBuild,
		r.FirmwareRevision, r.ToolVersion, r.Host, r.Outcome, r.Reason, r.Steps, null(r.MeanSpeedMPS), null(r.PeakFriction),
		null(r.MinNormalForceN), null(r.LatencyP50US), null(r.LatencyP99US), null(r.LatencyMaxUS), string(alarms),
		margins, radius[0], radius[1], radius[2], eigen}
	if s.postgres {
		return s.db.QueryRowContext(ctx, s.bind(q)+" RETURNING id", args...).Scan(&r.ID)
	}
	res, err := s.db.ExecContext(ctx, q, args...)
	if err != nil {
		return err
	}
	r.ID, err = res.LastInsertId()
	return err
}

// MaxSeries bounds how many results Series returns (the newest): a trend
// page of a year of nightly builds fits many times over.
const MaxSeries = 5000

// Series returns the stored results of a scenario, oldest first, at most
// the newest limit of them (limit ≤ 0 or above MaxSeries means MaxSeries).
func (s *Store) Series(ctx context.Context, scenario string, limit int) ([]Result, error) {
	if limit <= 0 || limit > MaxSeries {
		limit = MaxSeries
	}
	rows, err := s.db.QueryContext(ctx, s.bind(`SELECT id, recorded_at, command, scenario, scenario_sha256, firmware_name,
		firmware_build, firmware_revision, tool_version, host, outcome, reason, steps, mean_speed_mps,
		peak_friction_utilization, min_normal_force_n, latency_p50_us, latency_p99_us, latency_max_us, alarms,
		margins, spectral_radius, spectral_radius_low, spectral_radius_high, eigenvalues
		FROM gaitrig_results WHERE scenario = ? ORDER BY id DESC LIMIT ?`), scenario, limit)
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	var out []Result
	for rows.Next() {
		var r Result
		var at, alarms string
		var margins, eigen sql.NullString
		var f [9]sql.NullFloat64
		if err := rows.Scan(&r.ID, &at, &r.Command, &r.Scenario, &r.ScenarioSHA256, &r.FirmwareName, &r.FirmwareBuild,
			&r.FirmwareRevision, &r.ToolVersion, &r.Host, &r.Outcome, &r.Reason, &r.Steps,
			&f[0], &f[1], &f[2], &f[3], &f[4], &f[5], &alarms, &margins, &f[6], &f[7], &f[8], &eigen); err != nil {
			return nil, err
		}
		if r.RecordedAt, err = time.Parse(time.RFC3339Nano, at); err != nil {
			return nil, fmt.Errorf("result %d: recorded_at %q: %v", r.ID, at, err)
		}
		v := make([]float64, len(f))
		for i, x := range f {
			v[i] = math.NaN()
			if x.Valid {
				v[i] = x.Float64
			}
		}
		r.MeanSpeedMPS, r.PeakFriction, r.MinNormalForceN, r.LatencyP50US, r.LatencyP99US, r.LatencyMaxUS = v[0], v[1], v[2], v[3], v[4], v[5]
		if err := json.Unmarshal([]byte(alarms), &r.Alarms); err != nil {
			return nil, fmt.Errorf("result %d: alarms: %v", r.ID, err)
		}
		if margins.Valid {
			if err := decodeMargins(margins.String, &r.Margins); err != nil {
				return nil, fmt.Errorf("result %d: margins: %v", r.ID, err)
			}
		}
		if eigen.Valid {
			st := &Stability{SpectralRadius: v[6], RadiusLow: v[7], RadiusHigh: v[8]}
			if err := json.Unmarshal([]byte(eigen.String), &st.Eigenvalues); err != nil {
				return nil, fmt.Errorf("result %d: eigenvalues: %v", r.ID, err)
			}
			r.Stability = st
		}
		out = append(out, r)
	}
	if err := rows.Err(); err != nil {
		return nil, err
	}
	sort.Slice(out, func(i, j int) bool { return out[i].ID < out[j].ID })
	return out, nil
}

// Scenarios lists the scenario names with stored results, sorted.
func (s *Store) Scenarios(ctx context.Context) ([]string, error) {
	rows, err := s.db.QueryContext(ctx, "SELECT DISTINCT scenario FROM gaitrig_results ORDER BY scenario")
	if err != nil {
		return nil, err
	}
	defer rows.Close()
	var out []string
	for rows.Next() {
		var n string
		if err := rows.Scan(&n); err != nil {
			return nil, err
		}
		out = append(out, n)
	}
	return out, rows.Err()
}

// decodeMargins reads the margins column; a limit stored as null (not
// measured) reads back as NaN.
func decodeMargins(text string, out *map[string]Margin) error {
	var raw map[string]struct {
		Limit       *float64 `json:"limit"`
		Resolution  *float64 `json:"resolution"`
		Unit        string   `json:"unit"`
		Reached     bool     `json:"reached"`
		NotMeasured string   `json:"not_measured"`
	}
	if err := json.Unmarshal([]byte(text), &raw); err != nil {
		return err
	}
	*out = make(map[string]Margin, len(raw))
	orNaN := func(p *float64) float64 {
		if p == nil {
			return math.NaN()
		}
		return *p
	}
	for k, m := range raw {
		(*out)[k] = Margin{Limit: orNaN(m.Limit), Resolution: orNaN(m.Resolution), Unit: m.Unit, Reached: m.Reached, NotMeasured: m.NotMeasured}
	}
	return nil
}

// ErrNoResults is returned for a scenario with nothing stored.
var ErrNoResults = errors.New("no stored results")
