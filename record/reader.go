package record

import (
	"bufio"
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"gaitrig/internal/nonfinite"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"time"
)

// Run is a run folder read back. Telemetry is not loaded: iterate it with
// Ticks, which streams, or load it whole with AllTicks.
type Run struct {
	// Dir is the run folder.
	Dir string
	// Manifest is the run's manifest.
	Manifest Manifest
	// Steps are the complete rows of steps.csv.
	Steps []Step
	// Events are the complete lines of events.jsonl.
	Events []Event
	// Summary is nil when summary.json is missing: the run was killed or is
	// still going.
	Summary *Summary
	// Notes say what was incomplete: a truncated last line, a missing
	// summary. Empty for a run that closed normally.
	Notes []string
}

// Open reads a run folder: manifest, steps, events and summary. A truncated
// last line in steps.csv or events.jsonl (a run killed mid-write) is skipped
// and noted in Run.Notes; a malformed line elsewhere is an error naming the
// file and line.
func Open(dir string) (*Run, error) {
	r := &Run{Dir: dir}
	data, err := os.ReadFile(filepath.Join(dir, ManifestFile))
	if err != nil {
		return nil, fmt.Errorf("record: %w", err)
	}
	if r.Manifest, err = readManifest(filepath.Join(dir, ManifestFile), data); err != nil {
		return nil, err
	}
	if err := r.Manifest.checkSizes(); err != nil {
		return nil, fmt.Errorf("%w (%s)", err, filepath.Join(dir, ManifestFile))
	}
	if err := r.readSteps(); err != nil {
		return nil, err
	}
	if err := r.readEvents(); err != nil {
		return nil, err
	}
	data, err = os.ReadFile(filepath.Join(dir, SummaryFile))
	switch {
	case errors.Is(err, os.ErrNotExist):
		r.Notes = append(r.Notes, "summary.json is missing: the run did not finish (killed, or still running)")
	case err != nil:
		return nil, fmt.Errorf("record: %w", err)
	default:
		var s Summary
		if err := json.Unmarshal(data, &s); err != nil {
			return nil, fmt.Errorf("record: %s: %w", filepath.Join(dir, SummaryFile), err)
		}
		r.Summary = &s
	}
	return r, nil
}

// lines calls fn for each complete line of the file (without its newline).
// A last line without a newline is a line cut by a kill: it is not passed
// to fn, and lines returns truncated = true.
func lines(path string, fn func(n int, line []byte) error) (complete int, truncated bool, err error) {
	f, err := os.Open(path)
	if err != nil {
		return 0, false, fmt.Errorf("record: %w", err)
	}
	defer f.Close()
	br := bufio.NewReaderSize(f, 64<<10)
	for n := 1; ; n++ {
		line, err := br.ReadSlice('\n')
		if errors.Is(err, bufio.ErrBufferFull) {
			return complete, false, fmt.Errorf("record: %s:%d: line longer than %d bytes", path, n, br.Size())
		}
		if err == io.EOF {
			return complete, len(line) > 0, nil
		}
		if err != nil {
			return complete, false, fmt.Errorf("record: %s: %w", path, err)
		}
		if err := fn(n, line[:len(line)-1]); err != nil {
			return complete, false, fmt.Errorf("record: %s:%d: %w", path, n, err)
		}
		complete++
	}
}

func (r *Run) note(truncated bool, file string, complete int) {
	if truncated {
		r.Notes = append(r.Notes, fmt.Sprintf("%s: last line is incomplete (run killed mid-write); read %d complete lines", file, complete))
	}
}

func (r *Run) readSteps() error {
	path := filepath.Join(r.Dir, StepsFile)
	var f fields
	n, trunc, err := lines(path, func(n int, line []byte) error {
		if n == 1 {
			return checkHeader(line, stepTable.names(SchemaVersion))
		}
		if err := f.split(line, len(stepTable)); err != nil {
			return err
		}
		var s Step
		if err := parseRow(&f, stepTable, &s); err != nil {
			return err
		}
		r.Steps = append(r.Steps, s)
		return nil
	})
	if err != nil {
		return err
	}
	r.note(trunc, StepsFile, max(n-1, 0))
	return nil
}

// eventLine is the JSON shape of one events.jsonl line. Values are raw so a
// non-finite value (written by zerolog as a string) reads back as a number.
type eventLine struct {
	Tick     int64                      `json:"tick"`
	T        float64                    `json:"t_s"`
	Wall     string                     `json:"wall"`
	Kind     string                     `json:"kind"`
	Severity Severity                   `json:"severity"`
	Message  string                     `json:"message"`
	Foot     string                     `json:"foot"`
	Segment  *int                       `json:"segment"`
	Values   map[string]json.RawMessage `json:"values"`
}

func (r *Run) readEvents() error {
	path := filepath.Join(r.Dir, EventsFile)
	n, trunc, err := lines(path, func(n int, line []byte) error {
		var el eventLine
		if err := json.Unmarshal(line, &el); err != nil {
			return err
		}
		e := Event{Tick: el.Tick, T: el.T, Kind: el.Kind, Severity: el.Severity, Message: el.Message, Foot: el.Foot, Segment: NoSegment}
		if el.Segment != nil {
			e.Segment = *el.Segment
		}
		if el.Wall != "" {
			w, err := time.Parse(time.RFC3339Nano, el.Wall)
			if err != nil {
				return fmt.Errorf("wall: %w", err)
			}
			e.Wall = w
		}
		if len(el.Values) > 0 {
			e.Values = make(map[string]float64, len(el.Values))
			for k, raw := range el.Values {
				x, err := parseJSONNumber(raw)
				if err != nil {
					return fmt.Errorf("values.%s: %w", k, err)
				}
				e.Values[k] = x
			}
		}
		r.Events = append(r.Events, e)
		return nil
	})
	if err != nil {
		return err
	}
	r.note(trunc, EventsFile, n)
	return nil
}

// parseJSONNumber reads a JSON number, null (NaN) or one of the words
// "NaN", "+Inf", "-Inf" that zerolog writes for non-finite values.
func parseJSONNumber(raw json.RawMessage) (float64, error) {
	return nonfinite.ParseJSON(raw, 64)
}

func checkHeader(line []byte, want []string) error {
	got := string(line)
	if exp := csvHeader(want); got != exp[:len(exp)-1] {
		return fmt.Errorf("header does not match the expected columns\n got: %s\nwant: %s", got, exp[:len(exp)-1])
	}
	return nil
}

// fields splits one CSV line of plain numbers (our files never quote) and
// parses fields, remembering the first error.
type fields struct {
	f   [][]byte
	err error
}

func (f *fields) split(line []byte, want int) error {
	f.f = f.f[:0]
	f.err = nil
	for {
		i := bytes.IndexByte(line, ',')
		if i < 0 {
			f.f = append(f.f, line)
			break
		}
		f.f = append(f.f, line[:i])
		line = line[i+1:]
	}
	if len(f.f) != want {
		return fmt.Errorf("%d fields, want %d", len(f.f), want)
	}
	return nil
}

func (f *fields) float(i int) float64 {
	x, err := strconv.ParseFloat(string(f.f[i]), 64)
	if err != nil && f.err == nil {
		f.err = fmt.Errorf("field %d: %w", i+1, err)
	}
	return x
}

func (f *fields) int(i int) int64 {
	x, err := strconv.ParseInt(string(f.f[i]), 10, 64)
	if err != nil && f.err == nil {
		f.err = fmt.Errorf("field %d: %w", i+1, err)
	}
	return x
}

// TickReader streams telemetry rows from a run folder without loading the
// file. Use it as
//
//	tr, err := run.Ticks()
//	defer tr.Close()
//	for tr.Next() { use(tr.Tick()) }
//	if err := tr.Err(); err != nil { ... }
type TickReader struct {
	f         *os.File
	br        *bufio.Reader
	cols      table[Tick] // the columns of the file's schema, in file order
	line      int
	rows      int
	truncated bool
	err       error
	t         Tick
	fs        fields
}

// Ticks opens telemetry.csv for streaming. The header must be the columns
// of the manifest's schema for its coordinates and joints: current names,
// or the schema 1 names for a folder of schema 1.
func (r *Run) Ticks() (*TickReader, error) {
	path := filepath.Join(r.Dir, TelemetryFile)
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("record: %w", err)
	}
	all := tickFieldsOf(&r.Manifest)
	tr := &TickReader{f: f, br: bufio.NewReaderSize(f, 64<<10), cols: all.inVersion(r.Manifest.SchemaVersion)}
	head, err := tr.br.ReadSlice('\n')
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("record: %s: no complete header line: %v", path, err)
	}
	if err := checkHeader(head[:len(head)-1], all.names(r.Manifest.SchemaVersion)); err != nil {
		f.Close()
		return nil, fmt.Errorf("record: %s:1: %w", path, err)
	}
	tr.line = 1
	return tr, nil
}

// Next reads the next complete row. It returns false at the end of the file,
// at a truncated last line (see Truncated) or on an error (see Err).
func (tr *TickReader) Next() bool {
	if tr.err != nil || tr.truncated {
		return false
	}
	line, err := tr.br.ReadSlice('\n')
	tr.line++
	if err == io.EOF {
		tr.truncated = len(line) > 0
		return false
	}
	if err != nil {
		tr.err = fmt.Errorf("record: %s:%d: %w", TelemetryFile, tr.line, err)
		return false
	}
	if err := tr.parse(line[:len(line)-1]); err != nil {
		tr.err = fmt.Errorf("record: %s:%d: %w", TelemetryFile, tr.line, err)
		return false
	}
	tr.rows++
	return true
}

func (tr *TickReader) parse(line []byte) error {
	if err := tr.fs.split(line, len(tr.cols)); err != nil {
		return err
	}
	tr.t = Tick{}
	return parseRow(&tr.fs, tr.cols, &tr.t)
}

// Tick returns the row read by the last successful Next. The pointer stays
// valid, and is overwritten by the next call to Next.
func (tr *TickReader) Tick() *Tick { return &tr.t }

// Rows returns the number of complete rows read so far.
func (tr *TickReader) Rows() int { return tr.rows }

// Truncated reports whether reading stopped at an incomplete last line (a
// run killed mid-write).
func (tr *TickReader) Truncated() bool { return tr.truncated }

// Err returns the first error met, nil at a clean or truncated end.
func (tr *TickReader) Err() error { return tr.err }

// Close closes the file.
func (tr *TickReader) Close() error { return tr.f.Close() }

// AllTicks reads the whole telemetry file into memory. It returns the
// complete rows and whether the last line was truncated.
func (r *Run) AllTicks() (ticks []Tick, truncated bool, err error) {
	tr, err := r.Ticks()
	if err != nil {
		return nil, false, err
	}
	defer tr.Close()
	for tr.Next() {
		ticks = append(ticks, *tr.Tick())
	}
	return ticks, tr.Truncated(), tr.Err()
}
