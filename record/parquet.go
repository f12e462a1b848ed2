package record

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"

	"github.com/parquet-go/parquet-go"
)

// footModeColumns are the telemetry columns of the two foot contact modes.
var footModeColumns = [2]string{FootNames[0] + "_mode", FootNames[1] + "_mode"}

// parquetNode says how a telemetry column is stored in Parquet.
func parquetNode(col string) parquet.Node {
	switch {
	case col == "tick":
		return parquet.Leaf(parquet.Int64Type)
	case col == "stance" || col == footModeColumns[0] || col == footModeColumns[1]:
		// Only the two foot mode columns: a joint named like "hip_mode"
		// gives angle_hip_mode and friends, which are doubles.
		return parquet.Leaf(parquet.Int32Type)
	case col == "fresh":
		return parquet.Leaf(parquet.BooleanType)
	}
	return parquet.Leaf(parquet.DoubleType)
}

// ExportParquet writes the run's telemetry as telemetry.parquet in the run
// folder, one row per complete telemetry row, with the same column names
// (tick as int64, modes and stance as int32, fresh as boolean, the rest as
// double; Zstandard-compressed). It returns the number of rows written. A
// truncated last line is left out, as Open leaves it out.
func ExportParquet(dir string) (rows int, err error) {
	run, err := Open(dir)
	if err != nil {
		return 0, err
	}
	cols := TickColumns(run.Manifest.NumQ, run.Manifest.JointNames)
	group := parquet.Group{}
	for _, c := range cols {
		group[c] = parquetNode(c)
	}
	schema := parquet.NewSchema("telemetry", group)
	// A Group orders its columns by name; map each file column to its
	// Parquet column index.
	index := map[string]int{}
	for i, f := range schema.Fields() {
		index[f.Name()] = i
	}
	order := make([]int, len(cols))
	for i, c := range cols {
		order[i] = index[c]
	}

	tr, err := run.Ticks()
	if err != nil {
		return 0, err
	}
	defer tr.Close()
	final := filepath.Join(dir, ParquetFile)
	tmp, err := os.CreateTemp(dir, "."+ParquetFile+".*.tmp")
	if err != nil {
		return 0, fmt.Errorf("record: %w", err)
	}
	defer func() {
		if err != nil {
			tmp.Close()
			os.Remove(tmp.Name())
		}
	}()
	w := parquet.NewWriter(tmp, schema, parquet.Compression(&parquet.Zstd))
	vals := make([]float64, len(cols))
	batch := make([]parquet.Row, 0, 1024)
	flush := func() error {
		if _, err := w.WriteRows(batch); err != nil {
			return fmt.Errorf("record: parquet: %w", err)
		}
		batch = batch[:0]
		return nil
	}
	for tr.Next() {
		t := tr.Tick()
		vals = tickValues(vals[:0], t, run.Manifest.NumQ, len(run.Manifest.JointNames))
		row := make(parquet.Row, len(cols))
		for i, c := range cols {
			var v parquet.Value
			switch {
			case c == "tick":
				v = parquet.Int64Value(t.Index)
			case c == "stance":
				v = parquet.Int32Value(int32(t.Stance))
			case c == footModeColumns[0]:
				v = parquet.Int32Value(int32(t.Feet[0].Mode))
			case c == footModeColumns[1]:
				v = parquet.Int32Value(int32(t.Feet[1].Mode))
			case c == "fresh":
				v = parquet.BooleanValue(t.Fresh)
			default:
				v = parquet.DoubleValue(vals[i])
			}
			row[order[i]] = v.Level(0, 0, order[i])
		}
		batch = append(batch, row)
		rows++
		if len(batch) == cap(batch) {
			if err := flush(); err != nil {
				return rows, err
			}
		}
	}
	if err := tr.Err(); err != nil {
		return rows, err
	}
	if err := flush(); err != nil {
		return rows, err
	}
	if err := w.Close(); err != nil {
		return rows, fmt.Errorf("record: parquet: %w", err)
	}
	if err := errors.Join(tmp.Sync(), tmp.Close()); err != nil {
		return rows, fmt.Errorf("record: parquet: %w", err)
	}
	if err := os.Rename(tmp.Name(), final); err != nil {
		return rows, fmt.Errorf("record: %w", err)
	}
	return rows, nil
}

// tickValues lists a row's values as float64 in column order (integer and
// boolean columns included as numbers), matching TickColumns.
func tickValues(dst []float64, t *Tick, nq, nj int) []float64 {
	dst = append(dst, float64(t.Index), t.T, t.WallS)
	dst = append(dst, t.Q[:nq]...)
	dst = append(dst, t.V[:nq]...)
	dst = append(dst, t.Angle[:nj]...)
	dst = append(dst, t.Rate[:nj]...)
	dst = append(dst, t.Commanded[:nj]...)
	dst = append(dst, t.Applied[:nj]...)
	dst = append(dst, t.Push[0], t.Push[1])
	for _, f := range t.Feet {
		dst = append(dst, float64(f.Mode), f.NormalN, f.TangentialN, f.Utilization, f.CoP, f.ContactX)
	}
	fresh := 0.0
	if t.Fresh {
		fresh = 1
	}
	return append(dst, t.Kinetic, t.Potential, t.LatencyUS, fresh, float64(t.Stance))
}
