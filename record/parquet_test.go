package record

import (
	"errors"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"github.com/parquet-go/parquet-go"
)

// TestExportParquet writes a run, exports it and reads the Parquet file back
// with the library's own reader, column by column, bit for bit.
func TestExportParquet(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "run")
	w, err := Create(dir, testManifest())
	if err != nil {
		t.Fatal(err)
	}
	r := rand.New(rand.NewPCG(7, 8))
	var want []Tick
	for i := int64(0); i < 2500; i++ { // more than one write batch
		tk := randomTick(r, i)
		for k := 5; k < MaxQ; k++ {
			tk.Q[k], tk.V[k] = 0, 0
		}
		want = append(want, tk)
		w.Tick(&tk)
	}
	w.Close(Summary{Outcome: Pass})
	appendTo(t, filepath.Join(dir, TelemetryFile), "2500,2.5,0") // a cut last line is left out

	n, err := ExportParquet(dir)
	if err != nil {
		t.Fatal(err)
	}
	if n != len(want) {
		t.Fatalf("exported %d rows, want %d", n, len(want))
	}
	f, err := os.Open(filepath.Join(dir, ParquetFile))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	pr := parquet.NewReader(f)
	defer pr.Close()
	if pr.NumRows() != int64(len(want)) {
		t.Fatalf("file says %d rows", pr.NumRows())
	}
	cols, _ := expectedRow(&Tick{}, 5, testManifest().JointNames)
	idx := map[string]int{}
	for i, fl := range pr.Schema().Fields() {
		idx[fl.Name()] = i
	}
	if len(idx) != len(cols) {
		t.Fatalf("parquet has %d columns, want %d", len(idx), len(cols))
	}
	rows := make([]parquet.Row, 100)
	k := 0
	for {
		m, err := pr.ReadRows(rows)
		for _, row := range rows[:m] {
			_, exp := expectedRow(&want[k], 5, testManifest().JointNames)
			for ci, c := range cols {
				v := row[idx[c]]
				var got float64
				switch v.Kind() {
				case parquet.Int64:
					got = float64(v.Int64())
				case parquet.Int32:
					got = float64(v.Int32())
				case parquet.Boolean:
					if v.Boolean() {
						got = 1
					}
				case parquet.Double:
					got = v.Double()
				default:
					t.Fatalf("column %s has kind %v", c, v.Kind())
				}
				if !(math.Float64bits(got) == math.Float64bits(exp[ci]) || math.IsNaN(got) && math.IsNaN(exp[ci])) {
					t.Fatalf("row %d column %s: got %v want %v", k, c, got, exp[ci])
				}
			}
			k++
		}
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
	}
	if k != len(want) {
		t.Fatalf("read back %d rows", k)
	}
}

// A joint whose name starts with mode_ gives columns such as
// angle_mode_left_rad: they are joint readings (doubles), not foot contact
// modes; the column kind comes from the table, not from the name.
func TestExportParquetJointNamedMode(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "run")
	m := testManifest()
	m.JointNames = []string{"mode_left", "hip_right"}
	w, err := Create(dir, m)
	if err != nil {
		t.Fatal(err)
	}
	tk := Tick{Index: 0, Stance: 1, LatencyUS: math.NaN()}
	tk.Angle[0], tk.Feet[0].Mode = 0.25, 2
	w.Tick(&tk)
	if err := w.Close(Summary{Outcome: Pass}); err != nil {
		t.Fatal(err)
	}
	if _, err := ExportParquet(dir); err != nil {
		t.Fatal(err)
	}
	f, err := os.Open(filepath.Join(dir, ParquetFile))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	pr := parquet.NewReader(f)
	defer pr.Close()
	idx := map[string]int{}
	for i, fl := range pr.Schema().Fields() {
		idx[fl.Name()] = i
	}
	rows := make([]parquet.Row, 1)
	if n, err := pr.ReadRows(rows); n != 1 {
		t.Fatalf("read %d rows: %v", n, err)
	}
	if v := rows[0][idx["angle_mode_left_rad"]]; v.Kind() != parquet.Double || v.Double() != 0.25 {
		t.Errorf("angle_mode_left_rad = %v (kind %v), want the double 0.25", v, v.Kind())
	}
	if v := rows[0][idx["mode_left"]]; v.Kind() != parquet.Int32 || v.Int32() != 2 {
		t.Errorf("mode_left = %v (kind %v), want the int32 2", v, v.Kind())
	}
}
