package report

import (
	"bytes"
	"io"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/parquet-go/parquet-go"

	"github.com/armtally/armtally/experiment"
)

func auditSpec() experiment.Spec {
	return experiment.Spec{
		Control: "control",
		Metrics: []experiment.Metric{{Name: "purchase"}, {Name: "signup"}},
		// A dimension named like a fixed column gets its prefix, so
		// nothing clashes.
		Segments: []string{"platform", "status"},
	}
}

// auditRecords are three units, one of each status, with a null segment
// value and a unit without an exposure time.
func auditRecords() []experiment.UnitRecord {
	t0 := time.Date(2026, 11, 2, 3, 4, 5, 6, time.UTC).UnixNano()
	return []experiment.UnitRecord{
		{Unit: "a1", Arm: "control", T0: t0, HasT0: true,
			Segments:  []experiment.SegmentValue{{Value: "ios", Valid: true}, {}},
			Converted: []bool{true, false}, Immature: []bool{false, true}},
		{Unit: "a2", Arm: "treat", T0: t0 + 1, HasT0: true, Status: experiment.StatusMultiArm, MultiArm: true,
			Segments:  []experiment.SegmentValue{{Value: "web", Valid: true}, {Value: "x", Valid: true}},
			Converted: []bool{false, false}, Immature: []bool{false, false}},
		{Unit: "b", Arm: "control", Status: experiment.StatusTied, MultiArm: true,
			Segments:  []experiment.SegmentValue{{}, {}},
			Converted: []bool{false, false}, Immature: []bool{false, false}},
	}
}

// TestWriteAudit writes the audit table and reads it back row by row
// through parquet-go's generic row reader (not the writer's row path),
// checking the schema and every cell against the records, written out
// by hand below.
func TestWriteAudit(t *testing.T) {
	spec := auditSpec()
	recs := auditRecords()
	var buf bytes.Buffer
	if err := WriteAudit(&buf, spec, slices.Values(recs)); err != nil {
		t.Fatal(err)
	}
	f, err := parquet.OpenFile(bytes.NewReader(buf.Bytes()), int64(buf.Len()))
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, c := range f.Schema().Columns() {
		names = append(names, strings.Join(c, "."))
	}
	wantNames := "unit,arm,first_exposure,status,multi_arm,segment_platform,segment_status,converted_purchase,immature_purchase,converted_signup,immature_signup"
	if got := strings.Join(names, ","); got != wantNames {
		t.Fatalf("columns %s, want %s", got, wantNames)
	}
	if f.NumRows() != 3 {
		t.Fatalf("%d rows", f.NumRows())
	}
	// Each row as text: null is "-".
	var got []string
	for _, rg := range f.RowGroups() {
		rows := rg.Rows()
		buf := make([]parquet.Row, 8)
		for {
			n, err := rows.ReadRows(buf)
			for _, r := range buf[:n] {
				cells := make([]string, len(names))
				for _, v := range r {
					s := "-"
					if !v.IsNull() {
						switch v.Kind() {
						case parquet.ByteArray:
							s = string(v.ByteArray())
						case parquet.Int64:
							s = time.Unix(0, v.Int64()).UTC().Format(time.RFC3339Nano)
						default:
							s = v.String()
						}
					}
					cells[v.Column()] = s
				}
				got = append(got, strings.Join(cells, ","))
			}
			if err == io.EOF {
				break
			}
			if err != nil {
				t.Fatal(err)
			}
		}
		rows.Close()
	}
	want := []string{
		"a1,control,2026-11-02T03:04:05.000000006Z,analysed,false,ios,-,1,0,0,1",
		"a2,treat,2026-11-02T03:04:05.000000007Z,multi_arm,true,web,x,-,-,-,-",
		"b,control,-,tied,true,-,-,-,-,-,-",
	}
	if !slices.Equal(got, want) {
		t.Errorf("rows\n got %q\nwant %q", got, want)
	}

	// The same records give the same bytes.
	var again bytes.Buffer
	if err := WriteAudit(&again, spec, slices.Values(recs)); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(again.Bytes(), buf.Bytes()) {
		t.Error("two writes of the same records differ")
	}
}

func TestWriteAuditErrors(t *testing.T) {
	spec := auditSpec()
	recs := auditRecords()
	unsorted := []experiment.UnitRecord{recs[1], recs[0]}
	var buf bytes.Buffer
	if err := WriteAudit(&buf, spec, slices.Values(unsorted)); err == nil || !strings.Contains(err.Error(), `unit "a1" comes after "a2"`) {
		t.Errorf("unsorted: error %v", err)
	}
	twice := []experiment.UnitRecord{recs[0], recs[0]}
	if err := WriteAudit(&buf, spec, slices.Values(twice)); err == nil || !strings.Contains(err.Error(), "each once") {
		t.Errorf("a unit twice: error %v", err)
	}
	short := recs[0]
	short.Converted = short.Converted[:1]
	if err := WriteAudit(&buf, spec, slices.Values([]experiment.UnitRecord{short})); err == nil || !strings.Contains(err.Error(), `unit "a1"`) {
		t.Errorf("short record: error %v", err)
	}
}
