package sampledata

import (
	"bytes"
	"encoding/csv"
	"errors"
	"io"
	"math/rand/v2"
	"regexp"
	"slices"
	"testing"
	"time"

	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/format"
)

type writeFunc func(io.Writer, Config, rand.Source) (Summary, error)

type namedWriter struct {
	name  string
	write writeFunc
}

func writers() []namedWriter {
	return []namedWriter{{"parquet", WriteParquet}, {"csv", WriteCSV}}
}

func writeBytes(t *testing.T, write writeFunc, cfg Config, seed uint64) ([]byte, Summary) {
	t.Helper()
	var buf bytes.Buffer
	sum, err := write(&buf, cfg, rand.NewPCG(seed, 99))
	if err != nil {
		t.Fatalf("write: %v", err)
	}
	return buf.Bytes(), sum
}

func TestWriteDeterministic(t *testing.T) {
	cfg := trapConfig(3000)
	cfg.ShuffleBlock = 100
	cfg.RowGroupSize = 4000
	for _, w := range writers() {
		t.Run(w.name, func(t *testing.T) {
			a, _ := writeBytes(t, w.write, cfg, 1)
			b, _ := writeBytes(t, w.write, cfg, 1)
			c, _ := writeBytes(t, w.write, cfg, 2)
			if !bytes.Equal(a, b) {
				t.Error("same seed, different bytes")
			}
			if bytes.Equal(a, c) {
				t.Error("different seeds, same bytes")
			}
		})
	}
}

// parquetRows reads every row of a Parquet file with parquet-go's untyped
// row API, so the check does not depend on the writer's Go struct.
func parquetRows(t *testing.T, f *parquet.File) []parquet.Row {
	t.Helper()
	var out []parquet.Row
	for _, rg := range f.RowGroups() {
		rows := rg.Rows()
		buf := make([]parquet.Row, 512)
		for {
			n, err := rows.ReadRows(buf)
			for _, r := range buf[:n] {
				out = append(out, r.Clone())
			}
			if err == io.EOF {
				break
			}
			if err != nil {
				t.Fatalf("read rows: %v", err)
			}
		}
		if err := rows.Close(); err != nil {
			t.Fatalf("close rows: %v", err)
		}
	}
	return out
}

func TestWriteReadBack(t *testing.T) {
	cfg := trapConfig(3000)
	cfg.ShuffleBlock = 250
	cfg.RowGroupSize = 5000
	pq, pqSum := writeBytes(t, WriteParquet, cfg, 42)
	cv, cvSum := writeBytes(t, WriteCSV, cfg, 42)

	// Both writers report the same generation.
	if pqSum.Rows != cvSum.Rows || !slices.Equal(pqSum.UnitsPerArm, cvSum.UnitsPerArm) {
		t.Fatalf("summaries differ: parquet %+v, csv %+v", pqSum, cvSum)
	}
	// Units per arm add up to Users; single-arm plus multi-arm units too.
	var perArm, single int64
	for a := range cfg.Arms {
		perArm += pqSum.UnitsPerArm[a]
		single += pqSum.SingleArmUnits[a]
	}
	if perArm != int64(cfg.Users) || single+pqSum.MultiArmUnits != int64(cfg.Users) || pqSum.Units != int64(cfg.Users) {
		t.Errorf("units: per arm %d, single %d + multi %d, units %d; want each total %d",
			perArm, single, pqSum.MultiArmUnits, pqSum.Units, cfg.Users)
	}

	f, err := parquet.OpenFile(bytes.NewReader(pq), int64(len(pq)))
	if err != nil {
		t.Fatalf("open parquet: %v", err)
	}

	t.Run("schema", func(t *testing.T) {
		want := []struct {
			name     string
			kind     parquet.Kind
			logical  string // the logical type as parquet-go prints it
			optional bool
		}{
			{"user_id", parquet.ByteArray, "STRING", false},
			{"ts", parquet.Int64, "TIMESTAMP(isAdjustedToUTC=true,unit=MICROS)", false},
			{"event", parquet.ByteArray, "STRING", false},
			{"experiment", parquet.ByteArray, "STRING", true},
			{"arm", parquet.ByteArray, "STRING", true},
			{"platform", parquet.ByteArray, "STRING", false},
		}
		fields := f.Schema().Fields()
		if len(fields) != len(want) {
			t.Fatalf("%d columns, want %d", len(fields), len(want))
		}
		for i, w := range want {
			fl := fields[i]
			if fl.Name() != w.name || fl.Type().Kind() != w.kind || fl.Type().String() != w.logical ||
				fl.Optional() != w.optional || !fl.Leaf() {
				t.Errorf("column %d: %s %v %s optional=%t, want %s %v %s optional=%t",
					i, fl.Name(), fl.Type().Kind(), fl.Type(), fl.Optional(), w.name, w.kind, w.logical, w.optional)
			}
		}
		if !slices.Equal(Columns(), []string{"user_id", "ts", "event", "experiment", "arm", "platform"}) {
			t.Errorf("Columns() = %v", Columns())
		}
	})

	t.Run("row groups and encodings", func(t *testing.T) {
		groups := f.Metadata().RowGroups
		// ceil(rows / 5000) row groups, each full but the last.
		if want := int((pqSum.Rows + 4999) / 5000); len(groups) != want {
			t.Fatalf("%d row groups for %d rows, want %d", len(groups), pqSum.Rows, want)
		}
		for i, g := range groups {
			if i < len(groups)-1 && g.NumRows != 5000 {
				t.Errorf("row group %d: %d rows, want 5000", i, g.NumRows)
			}
			for _, c := range g.Columns {
				md := c.MetaData
				if md.Codec != format.Zstd {
					t.Errorf("row group %d column %v: codec %v, want ZSTD", i, md.PathInSchema, md.Codec)
				}
				dict := slices.Contains(md.Encoding, format.RLEDictionary)
				if isString := md.Type == format.ByteArray; isString != dict {
					t.Errorf("row group %d column %v: encodings %v, want dictionary on string columns only", i, md.PathInSchema, md.Encoding)
				}
			}
		}
		if f.NumRows() != pqSum.Rows {
			t.Errorf("file has %d rows, summary says %d", f.NumRows(), pqSum.Rows)
		}
	})

	t.Run("rows match csv", func(t *testing.T) {
		prows := parquetRows(t, f)
		cr := csv.NewReader(bytes.NewReader(cv))
		records, err := cr.ReadAll()
		if err != nil {
			t.Fatalf("read csv: %v", err)
		}
		if !slices.Equal(records[0], Columns()) {
			t.Fatalf("csv header %v, want %v", records[0], Columns())
		}
		records = records[1:]
		if int64(len(records)) != cvSum.Rows || int64(len(prows)) != pqSum.Rows {
			t.Fatalf("csv %d rows, parquet %d rows, summary %d", len(records), len(prows), pqSum.Rows)
		}
		tsText := regexp.MustCompile(`^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\.\d{6}Z$`)
		var nulls, exposures int
		for i, rec := range records {
			pr := prows[i]
			// Values come in column order; experiment and arm are null or not.
			str := func(col int) (string, bool) {
				v := pr[col]
				if v.Column() != col {
					t.Fatalf("row %d: value %d is column %d", i, col, v.Column())
				}
				return string(v.ByteArray()), !v.IsNull()
			}
			if !tsText.MatchString(rec[1]) {
				t.Fatalf("csv row %d: ts %q, want RFC 3339 UTC with 6 fractional digits", i, rec[1])
			}
			cts, err := time.Parse(time.RFC3339Nano, rec[1])
			if err != nil {
				t.Fatalf("csv row %d: %v", i, err)
			}
			pts := time.UnixMicro(pr[1].Int64())
			if !cts.Equal(pts) {
				t.Fatalf("row %d: csv ts %v, parquet ts %v", i, cts, pts)
			}
			for _, col := range []int{0, 2, 3, 4, 5} {
				s, ok := str(col)
				if s != rec[col] {
					t.Fatalf("row %d column %d: parquet %q, csv %q", i, col, s, rec[col])
				}
				exposureCol := col == 3 || col == 4
				isExposure := rec[2] == cfg.ExposureEvent
				if exposureCol && ok != isExposure {
					t.Fatalf("row %d column %d: null = %t on event %q", i, col, !ok, rec[2])
				}
				if !exposureCol && !ok {
					t.Fatalf("row %d column %d: null in a required column", i, col)
				}
				if exposureCol && !ok {
					nulls++
				}
			}
			if rec[2] == cfg.ExposureEvent {
				exposures++
			}
		}
		if int64(exposures) != pqSum.ExposureRows {
			t.Errorf("%d exposure rows, summary says %d", exposures, pqSum.ExposureRows)
		}
		// Each non-exposure row has a null experiment and a null arm.
		if want := 2 * (len(records) - exposures); nulls != want {
			t.Errorf("%d nulls, want %d", nulls, want)
		}
	})
}

// failWriter accepts n bytes, then fails.
type failWriter struct{ n int }

var errFull = errors.New("device full")

func (w *failWriter) Write(p []byte) (int, error) {
	if len(p) > w.n {
		k := w.n
		w.n = 0
		return k, errFull
	}
	w.n -= len(p)
	return len(p), nil
}

func TestWriteErrors(t *testing.T) {
	for _, w := range writers() {
		t.Run(w.name+"/invalid config", func(t *testing.T) {
			var buf bytes.Buffer
			cfg := DemoConfig()
			cfg.Arms = cfg.Arms[:1]
			_, err := w.write(&buf, cfg, rand.NewPCG(1, 1))
			if !errors.Is(err, ErrInvalidConfig) {
				t.Errorf("err = %v, want ErrInvalidConfig", err)
			}
			if buf.Len() != 0 {
				t.Errorf("%d bytes written for an invalid config, want 0", buf.Len())
			}
		})
		t.Run(w.name+"/writer fails", func(t *testing.T) {
			cfg := DemoConfig()
			cfg.Users = 2000
			_, err := w.write(&failWriter{n: 10000}, cfg, rand.NewPCG(1, 1))
			if !errors.Is(err, errFull) {
				t.Errorf("err = %v, want it to wrap %v", err, errFull)
			}
		})
	}
}

func BenchmarkWriteParquet1M(b *testing.B) {
	cfg := DemoConfig()
	cfg.Users = 1000000
	cfg.NeverExposedUsers = 10000
	cfg.RowGroupSize = 0
	for b.Loop() {
		sum, err := WriteParquet(io.Discard, cfg, rand.NewPCG(1, 2))
		if err != nil {
			b.Fatal(err)
		}
		b.ReportMetric(float64(sum.Rows), "rows")
	}
}
