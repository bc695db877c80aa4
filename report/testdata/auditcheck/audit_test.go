// Package auditcheck reads the audit table that report.WriteAudit writes
// (with parquet-go) back with a second, independent Parquet library,
// Apache Arrow's pqarrow, and compares every cell with the unit records
// it came from. It is a module of its own so that the main module does
// not depend on Arrow's Parquet packages; run it by hand:
//
//	cd report/testdata/auditcheck && go test ./...
package auditcheck

import (
	"bytes"
	"context"
	"fmt"
	"slices"
	"testing"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
	"github.com/apache/arrow-go/v18/arrow/memory"
	"github.com/apache/arrow-go/v18/parquet/file"
	"github.com/apache/arrow-go/v18/parquet/pqarrow"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/ingest"
	"github.com/armtally/armtally/report"
	"github.com/armtally/armtally/sampledata"
)

// TestAuditReadsBackWithArrow tallies the embedded demo log, writes its
// unit records as the audit table and reads the table with pqarrow.
func TestAuditReadsBackWithArrow(t *testing.T) {
	facts := sampledata.DemoSpec()
	start, end := facts.Start, facts.End.Add(-5*24*3600e9) // some units immature
	spec := experiment.Spec{
		Key: facts.Experiment, ExposureEvent: facts.ExposureEvent, Control: facts.Control,
		Start: &start, End: &end, Segments: []string{facts.Segment},
	}
	for _, m := range facts.Metrics {
		spec.Metrics = append(spec.Metrics, experiment.Metric{Name: m.Event, Events: []string{m.Event}, Window: m.Window})
	}
	name, data := sampledata.Demo()
	m := ingest.DefaultMapping()
	m.Segments = spec.Segments
	rd, err := ingest.NewReader([]ingest.Source{ingest.BytesSource(name, data)}, ingest.Options{Mapping: m, ExposureEvent: spec.ExposureEvent})
	if err != nil {
		t.Fatal(err)
	}
	tl, err := experiment.NewTallier(spec)
	if err != nil {
		t.Fatal(err)
	}
	for rd.Next() {
		if err := tl.Add(rd.RecordBatch()); err != nil {
			t.Fatal(err)
		}
	}
	if err := rd.Err(); err != nil {
		t.Fatal(err)
	}
	rd.Close()
	seq, err := tl.Units()
	if err != nil {
		t.Fatal(err)
	}
	recs := slices.Collect(seq)
	var buf bytes.Buffer
	if err := report.WriteAudit(&buf, spec, slices.Values(recs)); err != nil {
		t.Fatal(err)
	}

	pf, err := file.NewParquetReader(bytes.NewReader(buf.Bytes()))
	if err != nil {
		t.Fatal(err)
	}
	fr, err := pqarrow.NewFileReader(pf, pqarrow.ArrowReadProperties{}, memory.DefaultAllocator)
	if err != nil {
		t.Fatal(err)
	}
	table, err := fr.ReadTable(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	defer table.Release()
	if table.NumRows() != int64(len(recs)) {
		t.Fatalf("%d rows, %d records", table.NumRows(), len(recs))
	}
	// Flatten each column to one text value per row; null is "-".
	cols := map[string][]string{}
	for i := 0; i < int(table.NumCols()); i++ {
		c := table.Column(i)
		var vals []string
		for _, chunk := range c.Data().Chunks() {
			for r := 0; r < chunk.Len(); r++ {
				if chunk.IsNull(r) {
					vals = append(vals, "-")
					continue
				}
				switch a := chunk.(type) {
				case *array.String:
					vals = append(vals, a.Value(r))
				case *array.Timestamp:
					if u := a.DataType().(*arrow.TimestampType).Unit; u != arrow.Nanosecond {
						t.Fatalf("first_exposure unit %v", u)
					}
					vals = append(vals, fmt.Sprint(int64(a.Value(r))))
				case *array.Boolean:
					vals = append(vals, fmt.Sprint(a.Value(r)))
				case *array.Int8:
					vals = append(vals, fmt.Sprint(a.Value(r)))
				default:
					t.Fatalf("column %s: unexpected type %s", c.Name(), chunk.DataType())
				}
			}
		}
		cols[c.Name()] = vals
	}
	flag := func(b bool) string {
		if b {
			return "1"
		}
		return "0"
	}
	var statuses = map[string]int{}
	for i, r := range recs {
		want := map[string]string{
			"unit": r.Unit, "arm": r.Arm, "first_exposure": fmt.Sprint(r.T0),
			"status": r.Status.String(), "multi_arm": fmt.Sprint(r.MultiArm),
			"segment_" + facts.Segment: r.Segments[0].Value,
		}
		for k, mt := range spec.Metrics {
			c, im := "-", "-"
			if r.Status == experiment.StatusAnalysed {
				c, im = flag(r.Converted[k]), flag(r.Immature[k])
			}
			want["converted_"+mt.Name], want["immature_"+mt.Name] = c, im
		}
		for col, v := range want {
			if got := cols[col][i]; got != v {
				t.Fatalf("row %d (%s), column %s: %q, want %q", i+1, r.Unit, col, got, v)
			}
		}
		statuses[r.Status.String()]++
		if i > 0 && recs[i-1].Unit >= r.Unit {
			t.Fatalf("rows not sorted at %d", i+1)
		}
	}
	if len(cols) != 5+1+2*len(spec.Metrics) || statuses["analysed"] == 0 || statuses["multi_arm"] == 0 {
		t.Errorf("%d columns, statuses %v", len(cols), statuses)
	}
	t.Logf("%d rows checked; statuses %v", len(recs), statuses)
}
