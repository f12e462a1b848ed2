package record

import (
	"bufio"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"sync"
	"sync/atomic"
	"time"

	"github.com/rs/zerolog"
)

// Writer streams one run into its folder. Its methods are safe for use from
// several goroutines (the loop writes ticks, a link watcher may log events),
// but Tick is meant for one: it hands the row to the telemetry goroutine
// (see telemetry.go) and allocates nothing.
type Writer struct {
	mu  sync.Mutex
	dir string
	m   Manifest
	// cols is the telemetry column table of this run, built once so
	// formatting a row allocates nothing.
	cols table[Tick]

	tele      *os.File
	teleBuf   *bufio.Writer // owned by the telemetry goroutine once it runs
	row       []byte        // reused row buffer, likewise
	cur       Tick          // the row being formatted, likewise
	lastFlush time.Time     // likewise
	ticks     atomic.Int64  // rows handed to Tick
	pipe      telePipe

	events    *os.File
	eventsOut eventWriter // between log and events, to catch write errors
	log       zerolog.Logger

	steps   *os.File
	stepBuf []byte
	step    Step // the step being formatted (under mu), so Step allocates nothing
	closed  bool
}

// Create makes the run folder dir (and its parents) and writes the manifest
// and the headers of telemetry.csv and steps.csv. It refuses a folder that
// exists and is not empty, so a run never overwrites another.
// m.SchemaVersion and m.Columns are filled in; a zero m.StartTime is set to now.
func Create(dir string, m Manifest) (*Writer, error) {
	if err := m.checkSizes(); err != nil {
		return nil, err
	}
	if entries, err := os.ReadDir(dir); err == nil && len(entries) > 0 {
		return nil, fmt.Errorf("record: run folder %s already exists and is not empty; choose a new folder", dir)
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("record: %w", err)
	}
	m.SchemaVersion = SchemaVersion
	cols := tickFieldsOf(&m)
	m.Columns = cols.names(SchemaVersion)
	if m.StartTime.IsZero() {
		m.StartTime = time.Now()
	}
	w := &Writer{dir: dir, m: m, cols: cols, row: make([]byte, 0, 4096), stepBuf: make([]byte, 0, 1024)}
	// Creating telemetry.csv exclusively claims the folder: of two runs
	// started on one folder at once, exactly one gets past here, before
	// either has written a manifest the other could overwrite.
	var err error
	if w.tele, err = os.OpenFile(filepath.Join(dir, TelemetryFile), os.O_CREATE|os.O_EXCL|os.O_WRONLY, FileMode); err != nil {
		if errors.Is(err, os.ErrExist) {
			return nil, fmt.Errorf("record: run folder %s is already in use by another run; choose a new folder", dir)
		}
		return nil, fmt.Errorf("record: %w", err)
	}
	if err := writeJSONAtomic(filepath.Join(dir, ManifestFile), &w.m); err != nil {
		w.closeFiles()
		return nil, err
	}
	w.teleBuf = bufio.NewWriterSize(w.tele, 64<<10)
	w.teleBuf.WriteString(csvHeader(m.Columns))
	if err := w.teleBuf.Flush(); err != nil {
		w.closeFiles()
		return nil, fmt.Errorf("record: %w", err)
	}
	w.lastFlush = time.Now()
	if w.events, err = os.OpenFile(filepath.Join(dir, EventsFile), os.O_CREATE|os.O_EXCL|os.O_WRONLY, FileMode); err != nil {
		w.closeFiles()
		return nil, fmt.Errorf("record: %w", err)
	}
	// The events file is unbuffered: each event is one write(2), on disk
	// (in the page cache) the moment Event returns.
	w.eventsOut.f = w.events
	w.log = zerolog.New(&w.eventsOut)
	if w.steps, err = os.OpenFile(filepath.Join(dir, StepsFile), os.O_CREATE|os.O_EXCL|os.O_WRONLY, FileMode); err != nil {
		w.closeFiles()
		return nil, fmt.Errorf("record: %w", err)
	}
	if _, err := w.steps.WriteString(csvHeader(stepTable.names(SchemaVersion))); err != nil {
		w.closeFiles()
		return nil, fmt.Errorf("record: %w", err)
	}
	w.startTelemetry()
	return w, nil
}

// checkSizes refuses a manifest whose coordinates or joints do not fit the
// fixed arrays of a telemetry row. Create checks what it is given, Open what
// it reads, so a row is never indexed past its arrays.
func (m *Manifest) checkSizes() error {
	if m.NumQ < 0 || m.NumQ > MaxQ {
		return fmt.Errorf("record: manifest num_q %d out of range 0..%d", m.NumQ, MaxQ)
	}
	if len(m.JointNames) > MaxJoints {
		return fmt.Errorf("record: manifest has %d joints, at most %d fit a telemetry row", len(m.JointNames), MaxJoints)
	}
	return nil
}

// Dir returns the run folder.
func (w *Writer) Dir() string { return w.dir }

// Manifest returns the manifest as written (with SchemaVersion, Columns and
// StartTime filled in).
func (w *Writer) Manifest() Manifest {
	w.mu.Lock()
	defer w.mu.Unlock()
	return w.m
}

// SetGreeting records the firmware greeting in the manifest and rewrites it
// atomically. It must come before the first tick, so a reader never sees a
// manifest that changes under a growing telemetry file.
func (w *Writer) SetGreeting(g Greeting) error {
	w.mu.Lock()
	defer w.mu.Unlock()
	if w.closed {
		return errors.New("record: SetGreeting after Close")
	}
	if w.ticks.Load() > 0 {
		return errors.New("record: SetGreeting after the first tick; the greeting must be known before the run starts")
	}
	w.m.Greeting = g
	return writeJSONAtomic(filepath.Join(w.dir, ManifestFile), &w.m)
}

// Tick appends one telemetry row. It allocates nothing: the row is copied
// into a fixed queue and formatted by the telemetry goroutine, so the loop
// does not wait for number formatting. Rows reach the file at least every
// FlushInterval of wall time. An error of the telemetry file is returned by
// the next Tick (and by Close); rows after it are not written.
func (w *Writer) Tick(t *Tick) error {
	if w.pipe.closed.Load() {
		return errors.New("record: Tick after Close")
	}
	if err := w.pipe.err.Load(); err != nil {
		return *err
	}
	w.ticks.Add(1)
	w.pipe.rows <- *t
	return nil
}

// Flush writes every telemetry row handed to Tick so far to the file, and
// returns when it is there. The loop calls it when it is about to wait (for
// example for a late command), so rows do not sit in memory while no ticks
// arrive.
func (w *Writer) Flush() error {
	if w.pipe.closed.Load() {
		return nil
	}
	return w.flushTelemetry()
}

// Event appends one event to events.jsonl and writes it through at once.
// A zero e.Wall is set to now.
func (w *Writer) Event(e Event) error {
	w.mu.Lock()
	defer w.mu.Unlock()
	if w.closed {
		return errors.New("record: Event after Close")
	}
	if e.Wall.IsZero() {
		e.Wall = time.Now()
	}
	ev := w.log.Log().
		Int64("tick", e.Tick).
		Float64("t_s", e.T).
		Str("wall", e.Wall.Format(time.RFC3339Nano)).
		Str("kind", e.Kind).
		Str("severity", string(e.Severity)).
		Str("message", e.Message)
	if e.Foot != "" {
		ev = ev.Str("foot", e.Foot)
	}
	if e.Segment >= 0 {
		ev = ev.Int("segment", e.Segment)
	}
	if len(e.Values) > 0 {
		d := zerolog.Dict()
		for _, k := range sortedKeys(e.Values) {
			d = d.Float64(k, e.Values[k])
		}
		ev = ev.Dict("values", d)
	}
	w.eventsOut.err = nil
	ev.Send()
	if err := w.eventsOut.err; err != nil {
		return fmt.Errorf("record: events: %w", err)
	}
	return nil
}

// eventWriter is the events file as zerolog sees it. zerolog does not
// return a write error to the caller (it prints it to stderr), so the
// writer keeps it for Event to return: an event that did not reach the
// file must be reported, not lost in silence.
type eventWriter struct {
	f   *os.File
	err error // of the last write; Event clears it before each event
}

func (e *eventWriter) Write(p []byte) (int, error) {
	n, err := e.f.Write(p)
	if err != nil {
		e.err = err
	}
	// The error goes back through Event; handing it to zerolog as well
	// would only print it a second time on stderr.
	return n, nil
}

// Step appends one row to steps.csv and writes it through at once.
func (w *Writer) Step(s Step) error {
	w.mu.Lock()
	defer w.mu.Unlock()
	if w.closed {
		return errors.New("record: Step after Close")
	}
	w.step = s
	w.stepBuf = appendRow(w.stepBuf[:0], stepTable, &w.step)
	if _, err := w.steps.Write(w.stepBuf); err != nil {
		return fmt.Errorf("record: steps: %w", err)
	}
	return nil
}

// Close flushes the telemetry, writes summary.json atomically (a temporary
// file renamed into place) and closes every file. A zero s.Caution is set to
// Caution. Close is safe to call once; later calls return an error.
func (w *Writer) Close(s Summary) error {
	w.mu.Lock()
	defer w.mu.Unlock()
	if w.closed {
		return errors.New("record: Close called twice")
	}
	w.closed = true
	errs := []error{w.stopTelemetry()}
	if s.Caution == "" {
		s.Caution = Caution
	}
	if s.Ticks == 0 {
		s.Ticks = w.ticks.Load()
	}
	if s.ToolVersion == "" {
		s.ToolVersion = w.m.ToolVersion
	}
	if err := writeJSONAtomic(filepath.Join(w.dir, SummaryFile), &s); err != nil {
		errs = append(errs, err)
	}
	errs = append(errs, w.closeFiles())
	return errors.Join(errs...)
}

func (w *Writer) closeFiles() error {
	var errs []error
	for _, f := range []*os.File{w.tele, w.events, w.steps} {
		if f != nil {
			if err := f.Sync(); err != nil {
				errs = append(errs, err)
			}
			if err := f.Close(); err != nil {
				errs = append(errs, err)
			}
		}
	}
	return errors.Join(errs...)
}

// writeJSONAtomic writes v as indented JSON to a temporary file in the same
// folder, syncs it and renames it over path, so a reader sees the old file
// or the new one, never half of one.
func writeJSONAtomic(path string, v any) error {
	data, err := json.MarshalIndent(v, "", "  ")
	if err != nil {
		return fmt.Errorf("record: %s: %w", filepath.Base(path), err)
	}
	data = append(data, '\n')
	tmp, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".*.tmp")
	if err != nil {
		return fmt.Errorf("record: %w", err)
	}
	_, werr := tmp.Write(data)
	merr := tmp.Chmod(FileMode)
	serr := tmp.Sync()
	cerr := tmp.Close()
	if err := errors.Join(werr, merr, serr, cerr); err != nil {
		os.Remove(tmp.Name())
		return fmt.Errorf("record: %s: %w", filepath.Base(path), err)
	}
	if err := os.Rename(tmp.Name(), path); err != nil {
		os.Remove(tmp.Name())
		return fmt.Errorf("record: %w", err)
	}
	return nil
}

// appendFloat writes x in the shortest form that parses back to the same
// float64; NaN and ±Inf as NaN, +Inf, -Inf.
func appendFloat(b []byte, x float64) []byte {
	return strconv.AppendFloat(b, x, 'g', -1, 64)
}

// appendBit appends a flag as the CSV column value 1 or 0, which every
// spreadsheet and plotting tool reads as a number.
func appendBit(b []byte, v bool) []byte {
	if v {
		return append(b, '1')
	}
	return append(b, '0')
}
