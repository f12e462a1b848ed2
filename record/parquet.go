package record

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"

	"github.com/parquet-go/parquet-go"
)

// parquetNode says how a column of a kind is stored in Parquet.
func parquetNode(k Kind) parquet.Node {
	switch k {
	case Count:
		return parquet.Leaf(parquet.Int64Type)
	case Code:
		return parquet.Leaf(parquet.Int32Type)
	case Flag:
		return parquet.Leaf(parquet.BooleanType)
	}
	return parquet.Leaf(parquet.DoubleType)
}

// ExportParquet writes the run's telemetry as telemetry.parquet in the run
// folder, one row per complete telemetry row, with the columns of the
// current schema (TickColumns; a schema 1 folder gets the current names
// and the derived columns too): count columns as int64, code columns as
// int32, flags as boolean, the rest as double; Zstandard-compressed. It returns the number of rows written. A
// truncated last line is left out, as Open leaves it out.
func ExportParquet(dir string) (rows int, err error) {
	run, err := Open(dir)
	if err != nil {
		return 0, err
	}
	cols := tickFieldsOf(&run.Manifest)
	group := parquet.Group{}
	for _, c := range cols {
		group[c.Name] = parquetNode(c.Kind)
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
		order[i] = index[c.Name]
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
		row := make(parquet.Row, len(cols))
		for i := range cols {
			c := &cols[i]
			var v parquet.Value
			switch c.Kind {
			case Real:
				v = parquet.DoubleValue(c.real(t))
			case Count:
				v = parquet.Int64Value(c.whole(t))
			case Code:
				v = parquet.Int32Value(int32(c.whole(t)))
			case Flag:
				v = parquet.BooleanValue(c.whole(t) != 0)
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
	if err := errors.Join(tmp.Chmod(FileMode), tmp.Sync(), tmp.Close()); err != nil {
		return rows, fmt.Errorf("record: parquet: %w", err)
	}
	if err := os.Rename(tmp.Name(), final); err != nil {
		return rows, fmt.Errorf("record: %w", err)
	}
	return rows, nil
}
