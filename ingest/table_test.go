package ingest

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/parquet-go/parquet-go"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/sampledata"
)

// tableCase names the hand-made unit table's columns.
func handUnitOptions() UnitTableOptions {
	return UnitTableOptions{
		Unit: "customer", Arm: "group", TS: "first_seen",
		Metrics:  []ColumnMap{{"bought", "bought"}, {"subscribed", "subscribed"}},
		Segments: []ColumnMap{{"device", "device"}},
	}
}

func handSpec() experiment.Spec {
	start := time.Date(2026, 5, 4, 0, 0, 0, 0, time.UTC)
	end := start.Add(10 * 24 * time.Hour)
	return experiment.Spec{
		Key: "hand", Control: "control", Arms: []string{"control", "treat"},
		Start: &start, End: &end,
		Metrics: []experiment.Metric{
			{Name: "bought", Window: 24 * time.Hour},
			{Name: "subscribed"},
		},
		Segments: []string{"device"},
	}
}

// readUnitTable reads sources as a unit table and tallies them.
func readUnitTable(t *testing.T, spec experiment.Spec, sources []Source, opts UnitTableOptions) (experiment.Tally, []experiment.UnitRecord, Stats) {
	t.Helper()
	r, err := NewUnitTableReader(sources, opts)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	ut, err := experiment.NewUnitTableTallier(spec)
	if err != nil {
		t.Fatal(err)
	}
	for r.Next() {
		if err := ut.Add(r.RecordBatch()); err != nil {
			t.Fatal(err)
		}
	}
	if err := r.Err(); err != nil {
		t.Fatal(err)
	}
	tl, err := ut.Tally()
	if err != nil {
		t.Fatal(err)
	}
	var recs []experiment.UnitRecord
	for rec := range ut.Units() {
		recs = append(recs, rec)
	}
	return tl, recs, r.Stats()
}

// readCounts reads sources as a counts table and tallies them.
func readCounts(t *testing.T, spec experiment.Spec, sources []Source, opts CountsOptions) experiment.Tally {
	t.Helper()
	r, err := NewCountsReader(sources, opts)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	ct, err := experiment.NewCountsTallier(spec)
	if err != nil {
		t.Fatal(err)
	}
	for r.Next() {
		if err := ct.Add(r.RecordBatch()); err != nil {
			t.Fatal(err)
		}
	}
	if err := r.Err(); err != nil {
		t.Fatal(err)
	}
	tl, err := ct.Tally()
	if err != nil {
		t.Fatal(err)
	}
	return tl
}

func oneFile(t *testing.T, path string) Source {
	t.Helper()
	s, err := FileSources([]string{path})
	if err != nil {
		t.Fatal(err)
	}
	return s[0]
}

type armCounts struct {
	name  string
	units int64
	m     []experiment.Count
}

func armsOf(tl experiment.Tally) []armCounts {
	var out []armCounts
	for _, a := range tl.Arms {
		out = append(out, armCounts{a.Name, a.Units, a.Metrics})
	}
	return out
}

// handUnitParquet writes testdata/table_units.csv's rows as Parquet with
// parquet-go, in the column types a warehouse would use: INT64 ids,
// TIMESTAMP(MILLIS) times, BOOLEAN and INT32 flags, optional text.
func handUnitParquet(t *testing.T) []byte {
	t.Helper()
	type row struct {
		Customer   int64   `parquet:"customer"`
		Group      string  `parquet:"group"`
		FirstSeen  int64   `parquet:"first_seen,timestamp(millisecond)"`
		Bought     bool    `parquet:"bought"`
		Subscribed int32   `parquet:"subscribed"`
		Device     *string `parquet:"device,optional"`
	}
	ms := func(s string) int64 {
		ts, err := time.Parse("2006-01-02 15:04:05", s)
		if err != nil {
			t.Fatal(err)
		}
		return ts.UnixMilli()
	}
	str := func(s string) *string { return &s }
	rows := []row{
		{101, "control", ms("2026-05-04 01:00:00"), true, 0, str("ios")},
		{101, "control", ms("2026-05-04 05:00:00"), false, 1, str("android")},
		{102, "treat", ms("2026-05-04 02:00:00"), false, 0, str("web")},
		{102, "control", ms("2026-05-04 03:00:00"), true, 0, str("web")},
		{103, "treat", ms("2026-05-13 22:00:00"), true, 0, nil},
		{104, "control", ms("2026-05-15 00:00:00"), true, 1, str("ios")},
		{105, "treat", ms("2026-05-05 00:00:00"), true, 1, str("web")},
		{106, "control", ms("2026-05-06 00:00:00"), false, 0, str("ios")},
	}
	var buf bytes.Buffer
	w := parquet.NewGenericWriter[row](&buf, parquet.MaxRowsPerRowGroup(3))
	if _, err := w.Write(rows); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

// TestHandUnitTable reads the hand-made unit table (testdata/table_units.csv,
// and the same rows as Parquet) and checks the tally worked out by hand.
// Window [2026-05-04, 2026-05-14); bought has a 24h window, subscribed
// none; policy exclude.
//
//	101: control at 01:00 (bought) and 05:00 (subscribed): one unit,
//	     device ios (the earliest row), converted on both.
//	102: treat and control: multi-arm, left out.
//	103: treat at 05-13 22:00: bought's window ends after the window end,
//	     so immature on bought; subscribed 0; device null (empty cell).
//	104: control at 05-15: outside the window, ignored.
//	105: treat, bought and subscribed (written 1 and Yes).
//	106: control, neither.
//
// control = 101, 106: bought 1/2, subscribed 1/2. treat = 103, 105:
// bought 1/1 with 1 immature, subscribed 1/2. Rows 8, 1 outside the
// window, 5 units exposed, 1 multi-arm.
func TestHandUnitTable(t *testing.T) {
	want := []armCounts{
		{"control", 2, []experiment.Count{{Units: 2, Conversions: 1}, {Units: 2, Conversions: 1}}},
		{"treat", 2, []experiment.Count{{Units: 1, Conversions: 1, Immature: 1}, {Units: 2, Conversions: 1}}},
	}
	for _, src := range []Source{
		oneFile(t, filepath.Join("testdata", "table_units.csv")),
		BytesSource("table_units.parquet", handUnitParquet(t)),
	} {
		tl, recs, st := readUnitTable(t, handSpec(), []Source{src}, handUnitOptions())
		if got := armsOf(tl); !reflect.DeepEqual(got, want) {
			t.Errorf("%s: arms %+v, want %+v", src.Name, got, want)
		}
		d := tl.Diag
		if d.RowsRead != 8 || d.ExposuresOutsideWindow != 1 || d.UnitsExposed != 5 || d.MultiArmUnits != 1 || st.RowsRead != 8 || st.Rows != 8 {
			t.Errorf("%s: diagnostics %+v, stats %+v", src.Name, d, st)
		}
		// Integer ids became text; the empty device is null.
		var units []string
		for _, r := range recs {
			units = append(units, r.Unit)
		}
		if strings.Join(units, ",") != "101,102,103,105,106" || recs[2].Segments[0].Valid || recs[0].Segments[0].Value != "ios" {
			t.Errorf("%s: records %+v", src.Name, recs)
		}
		// device: control ios = 101, 106; treat web = 105, null = 103
		// (immature on bought). Every arm lists ios, web and null.
		cell := func(v string, units int64, bought, subscribed experiment.Count) experiment.SegmentCell {
			sv := experiment.SegmentValue{Value: v, Valid: v != ""}
			return experiment.SegmentCell{Value: sv, Units: units, Metrics: []experiment.Count{bought, subscribed}}
		}
		wantSegs := [][]experiment.SegmentCell{
			{cell("ios", 2, experiment.Count{Units: 2, Conversions: 1}, experiment.Count{Units: 2, Conversions: 1}),
				cell("web", 0, experiment.Count{}, experiment.Count{}), cell("", 0, experiment.Count{}, experiment.Count{})},
			{cell("ios", 0, experiment.Count{}, experiment.Count{}),
				cell("web", 1, experiment.Count{Units: 1, Conversions: 1}, experiment.Count{Units: 1, Conversions: 1}),
				cell("", 1, experiment.Count{Immature: 1}, experiment.Count{Units: 1})},
		}
		for i, a := range tl.Arms {
			if !reflect.DeepEqual(a.Segments[0].Values, wantSegs[i]) {
				t.Errorf("%s: %s device counts %+v, want %+v", src.Name, a.Name, a.Segments[0].Values, wantSegs[i])
			}
		}
	}
}

// TestHandCounts reads testdata/table_counts.csv, whose sums are worked out
// in the comment of experiment's TestCounts (the same cells):
//
//	control: 80 units, purchase 70/7 with 10 immature, signup 80/11
//	treat:   70 units, purchase 65/11 with 5 immature, signup 70/11
//
// and analyses it. Check values: sample ratio of 80 against 70 with an
// equal split, X2 = (80-75)^2/75 + (70-75)^2/75 = 2/3 by hand, p from R
// 4.2.2 chisq.test(c(80, 70))$p.value = 0.4142161782425251; purchase
// 11/65 vs 7/70, R 4.2.2 prop.test(c(11, 7), c(65, 70), correct = FALSE):
// X-squared = 1.3979289940828405 (= z^2), p = 0.23707063247006191.
func TestHandCounts(t *testing.T) {
	spec := handSpec()
	spec.Metrics = []experiment.Metric{{Name: "purchase"}, {Name: "signup"}}
	spec.Segments = []string{"platform"}
	opts := CountsOptions{
		Arm: "variant", Metric: "kpi", Units: "n", Conversions: "converted", Immature: "not_yet",
		Segments: []ColumnMap{{"platform", "platform"}},
		Metrics:  []string{"purchase", "signup"},
	}
	tl := readCounts(t, spec, []Source{oneFile(t, filepath.Join("testdata", "table_counts.csv"))}, opts)
	want := []armCounts{
		{"control", 80, []experiment.Count{{Units: 70, Conversions: 7, Immature: 10}, {Units: 80, Conversions: 11}}},
		{"treat", 70, []experiment.Count{{Units: 65, Conversions: 11, Immature: 5}, {Units: 70, Conversions: 11}}},
	}
	if got := armsOf(tl); !reflect.DeepEqual(got, want) {
		t.Fatalf("arms %+v, want %+v", got, want)
	}
	r, err := experiment.Analyze(spec, tl, experiment.DefaultAnalysisOptions())
	if err != nil {
		t.Fatal(err)
	}
	near := func(what string, got, want, tol float64) {
		if d := got - want; d > tol || d < -tol {
			t.Errorf("%s = %.17g, want %.17g", what, got, want)
		}
	}
	near("X2", r.SampleRatio.Statistic, 2.0/3, 1e-12)
	near("SRM p", r.SampleRatio.PValue, 0.4142161782425251, 1e-10)
	c := r.Metrics[0].Comparisons[0]
	near("purchase z^2", c.Z.Statistic*c.Z.Statistic, 1.3979289940828405, 1e-10)
	near("purchase p", c.Z.PValue, 0.23707063247006191, 1e-10)
	if r.Diagnostics.Input != "counts" || r.Diagnostics.UnitsExposed != 150 || r.Diagnostics.RowsRead != 8 {
		t.Errorf("diagnostics %+v", r.Diagnostics)
	}
}

// TestTableErrors checks that a bad cell stops the reader with an error
// naming the file, the row (CSV line or Parquet row) and the column.
func TestTableErrors(t *testing.T) {
	units := "customer,group,first_seen,bought,subscribed,device\n"
	cases := []struct {
		name, data string
		counts     bool
		want       string
		reason     error
	}{
		{"bad flag", units + "1,control,2026-05-04,1,0,ios\n2,control,2026-05-04,maybe,0,ios\n", false,
			`u.csv:3: column "bought": ` + ErrBadFlag.Error() + ` (value "maybe")`, ErrBadFlag},
		{"empty arm", units + "1,,2026-05-04,1,0,ios\n", false,
			`u.csv:2: column "group": null or empty value`, ErrNullCell},
		{"empty flag", units + "1,control,2026-05-04,,0,ios\n", false,
			`u.csv:2: column "bought": null or empty value`, ErrNullCell},
		{"bad time", units + "1,control,04/05/2026,1,0,ios\n", false,
			`u.csv:2: column "first_seen": cannot parse "04/05/2026" as a timestamp`, ErrBadTimestamp},
		{"negative count", "variant,platform,kpi,n,converted,not_yet\ncontrol,ios,purchase,-4,1,0\n", true,
			`c.csv:2: column "n": ` + ErrBadCount.Error() + ` (value "-4")`, ErrBadCount},
		{"too many conversions", "variant,platform,kpi,n,converted,not_yet\ncontrol,ios,purchase,4,5,0\n", true,
			`c.csv:2: column "converted": more conversions than units (value "5 conversions of 4 units")`, ErrTooMany},
		{"unknown metric", "variant,platform,kpi,n,converted,not_yet\ncontrol,ios,refunds,4,1,0\n", true,
			`c.csv:2: column "kpi": not a metric of the experiment (value "refunds")`, ErrUnknownMetric},
		{"duplicate", "variant,platform,kpi,n,converted,not_yet\ncontrol,,purchase,4,1,0\ntreat,,purchase,4,1,0\ncontrol,,purchase,5,1,0\n", true,
			`c.csv:4: column "kpi": ` + ErrDuplicateCell.Error() + ` (line 2) (value "purchase")`, ErrDuplicateCell},
		{"missing column", "variant,kpi,n,converted,not_yet\ncontrol,purchase,4,1,0\n", true,
			`c.csv: column "platform": missing column (the file has: variant, kpi, n, converted, not_yet)`, ErrMissingColumn},
	}
	for _, tc := range cases {
		var r *TableReader
		var err error
		if tc.counts {
			r, err = NewCountsReader([]Source{BytesSource("c.csv", []byte(tc.data))}, CountsOptions{
				Arm: "variant", Metric: "kpi", Units: "n", Conversions: "converted", Immature: "not_yet",
				Segments: []ColumnMap{{"platform", "platform"}}, Metrics: []string{"purchase", "signup"},
			})
		} else {
			r, err = NewUnitTableReader([]Source{BytesSource("u.csv", []byte(tc.data))}, handUnitOptions())
		}
		if err != nil {
			t.Fatal(err)
		}
		for r.Next() {
		}
		err = r.Err()
		r.Close()
		if err == nil || !strings.HasPrefix(err.Error(), tc.want) || !errors.Is(err, tc.reason) {
			t.Errorf("%s: error %v, want %q", tc.name, err, tc.want)
		}
	}

	// Parquet: the row and row group are named. Reading the text column
	// device as a flag fails at its first row; reading the INT32 flags
	// of subscribed is fine.
	opts := handUnitOptions()
	opts.Metrics = []ColumnMap{{"bought", "device"}, {"subscribed", "subscribed"}}
	opts.Segments = nil
	r, err := NewUnitTableReader([]Source{BytesSource("u.parquet", handUnitParquet(t))}, opts)
	if err != nil {
		t.Fatal(err)
	}
	for r.Next() {
	}
	if err := r.Err(); err == nil || err.Error() != `u.parquet:1: row group 0: column "device": `+ErrBadFlag.Error()+` (value "ios")` {
		t.Errorf("parquet: error %v", err)
	}
	r.Close()
}

// writeUnitTable writes the unit table derived from records as CSV and as
// Parquet (parquet-go), with physical names that differ from the logical
// ones. A multi-arm unit gets a second row in another planned arm one
// second after its first, which reproduces its status; every other unit
// gets one row.
func writeUnitTable(t *testing.T, dir string, spec experiment.Spec, recs []experiment.UnitRecord) (csvPath, pqPath string) {
	t.Helper()
	var rows [][]string
	header := []string{"unit_key", "variant", "exposed_at"}
	for _, m := range spec.Metrics {
		header = append(header, "m_"+m.Name)
	}
	for _, d := range spec.Segments {
		header = append(header, "seg_"+d)
	}
	mk := func(r experiment.UnitRecord, arm string, at int64) []string {
		row := []string{r.Unit, arm, time.Unix(0, at).UTC().Format(time.RFC3339Nano)}
		for m := range spec.Metrics {
			// Mixed spellings: the reader must take them all.
			row = append(row, map[bool]string{true: "yes", false: "0"}[r.Converted[m]])
		}
		for _, v := range r.Segments {
			row = append(row, map[bool]string{true: v.Value, false: ""}[v.Valid])
		}
		return row
	}
	for _, r := range recs {
		if r.Status == experiment.StatusTied {
			t.Fatal("the derived table cannot rebuild a tied unit")
		}
		rows = append(rows, mk(r, r.Arm, r.T0))
		if r.MultiArm {
			other := spec.Arms[0]
			if other == r.Arm {
				other = spec.Arms[1]
			}
			rows = append(rows, mk(r, other, r.T0+int64(time.Second)))
		}
	}
	csvPath = filepath.Join(dir, "units.csv")
	writeCSV(t, csvPath, header, rows)

	// Parquet: the same rows, ts as TIMESTAMP(NANOS), flags as BOOLEAN.
	fields := parquet.Group{
		"unit_key":   parquet.String(),
		"variant":    parquet.String(),
		"exposed_at": parquet.Timestamp(parquet.Nanosecond),
	}
	for _, m := range spec.Metrics {
		fields["m_"+m.Name] = parquet.Leaf(parquet.BooleanType)
	}
	for _, d := range spec.Segments {
		fields["seg_"+d] = parquet.Optional(parquet.String())
	}
	schema := parquet.NewSchema("units", fields)
	var buf bytes.Buffer
	w := parquet.NewWriter(&buf, schema)
	colIndex := map[string]int{}
	for i, path := range schema.Columns() {
		colIndex[path[0]] = i
	}
	for _, row := range rows {
		pr := make(parquet.Row, len(header))
		for j, name := range header {
			i := colIndex[name]
			cell := row[j]
			switch {
			case name == "exposed_at":
				ts, err := time.Parse(time.RFC3339Nano, cell)
				if err != nil {
					t.Fatal(err)
				}
				pr[i] = parquet.Int64Value(ts.UnixNano()).Level(0, 0, i)
			case strings.HasPrefix(name, "m_"):
				pr[i] = parquet.BooleanValue(cell == "yes").Level(0, 0, i)
			case strings.HasPrefix(name, "seg_") && cell == "":
				pr[i] = parquet.NullValue().Level(0, 0, i)
			case strings.HasPrefix(name, "seg_"):
				pr[i] = parquet.ByteArrayValue([]byte(cell)).Level(0, 1, i)
			default:
				pr[i] = parquet.ByteArrayValue([]byte(cell)).Level(0, 0, i)
			}
		}
		if _, err := w.WriteRows([]parquet.Row{pr}); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	pqPath = filepath.Join(dir, "units.parquet")
	if err := os.WriteFile(pqPath, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	return csvPath, pqPath
}

func writeCSV(t *testing.T, path string, header []string, rows [][]string) {
	t.Helper()
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	w.Write(header)
	w.WriteAll(rows)
	if err := w.Error(); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
}

// writeCounts aggregates the analysed records by arm, segment values and
// metric (a GROUP BY written here, apart from experiment's Accumulator)
// and writes the counts as CSV, with the cells in a shuffled but fixed
// order.
func writeCounts(t *testing.T, dir string, spec experiment.Spec, recs []experiment.UnitRecord) string {
	t.Helper()
	type key struct{ arm, seg, metric string }
	type sums struct{ units, conv, imm int64 }
	cells := map[key]*sums{}
	var order []key
	for _, r := range recs {
		if r.Status != experiment.StatusAnalysed {
			continue
		}
		for m, mt := range spec.Metrics {
			k := key{r.Arm, r.Segments[0].Value, mt.Name}
			if !r.Segments[0].Valid {
				k.seg = ""
			}
			s := cells[k]
			if s == nil {
				s = &sums{}
				cells[k] = s
				order = append(order, k)
			}
			if r.Immature[m] {
				s.imm++
				if spec.Maturity == experiment.MaturityExclude {
					continue
				}
			}
			s.units++
			if r.Converted[m] {
				s.conv++
			}
		}
	}
	var rows [][]string
	for i := range order {
		k := order[(i*7)%len(order)]
		if len(order)%7 == 0 {
			k = order[i]
		}
		s := cells[k]
		rows = append(rows, []string{k.arm, k.seg, k.metric, strconv.FormatInt(s.units, 10), strconv.FormatInt(s.conv, 10), strconv.FormatInt(s.imm, 10)})
	}
	path := filepath.Join(dir, "counts.csv")
	writeCSV(t, path, []string{"arm_name", "seg", "kpi", "n_units", "n_conv", "n_immature"}, rows)
	return path
}

// readoutJSON analyses a tally and encodes the readout, with the fields
// listed in blank set to their zero value first.
func readoutJSON(t *testing.T, spec experiment.Spec, tl experiment.Tally, blank func(*experiment.Readout)) []byte {
	t.Helper()
	r, err := experiment.Analyze(spec, tl, experiment.DefaultAnalysisOptions())
	if err != nil {
		t.Fatal(err)
	}
	blank(&r)
	b, err := json.MarshalIndent(r, "", " ")
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// TestThreeShapesAgree derives a unit table and a counts table from the
// stage-1 records of the embedded demo log, writes them as files (CSV and
// Parquet), reads them back and checks that all shapes give the same
// readout. The fields allowed to differ are exactly those the other
// shapes cannot know:
//
//   - unit table: data_freshness (no conversion times), and in the
//     diagnostics input, rows_read, exposure_rows and ignored_events (no
//     events);
//   - counts: the same, and units_exposed, multi_arm_units and tied_units
//     (no units: counts see the analysis population only).
//
// Everything else (arms, sample ratio, settings, multiple comparisons,
// segmentation, every metric with its segments, units per arm, immature
// units, warnings) must encode to the same bytes.
func TestThreeShapesAgree(t *testing.T) {
	facts := sampledata.DemoSpec()
	start, end := facts.Start, facts.End
	spec := experiment.Spec{
		Key: facts.Experiment, ExposureEvent: facts.ExposureEvent, Control: facts.Control,
		Start: &start, End: &end, Segments: []string{facts.Segment},
	}
	for _, a := range facts.Arms {
		spec.Arms = append(spec.Arms, a.Name)
	}
	for _, m := range facts.Metrics {
		spec.Metrics = append(spec.Metrics, experiment.Metric{Name: m.Event, Events: []string{m.Event}, Window: m.Window})
	}
	// A window that ends early, so that some units are immature.
	early := end.Add(-5 * 24 * time.Hour)
	for _, tc := range []struct {
		name string
		end  time.Time
	}{{"full window", end}, {"window with immature units", early}} {
		t.Run(tc.name, func(t *testing.T) {
			spec := spec
			spec.End = &tc.end
			name, data := sampledata.Demo()
			m := DefaultMapping()
			m.Segments = []string{facts.Segment}
			rd, err := NewReader([]Source{BytesSource(name, data)}, Options{Mapping: m, ExposureEvent: spec.ExposureEvent})
			if err != nil {
				t.Fatal(err)
			}
			tlr, err := experiment.NewTallier(spec)
			if err != nil {
				t.Fatal(err)
			}
			for rd.Next() {
				if err := tlr.Add(rd.RecordBatch()); err != nil {
					t.Fatal(err)
				}
			}
			if err := rd.Err(); err != nil {
				t.Fatal(err)
			}
			rd.Close()
			events, err := tlr.Tally()
			if err != nil {
				t.Fatal(err)
			}
			seq, err := tlr.Units()
			if err != nil {
				t.Fatal(err)
			}
			var recs []experiment.UnitRecord
			for r := range seq {
				recs = append(recs, r)
			}
			if events.Diag.MultiArmUnits == 0 {
				t.Fatal("the demo has no multi-arm units: the check would not cover them")
			}
			var immature int64
			for _, a := range events.Arms {
				immature += a.Metrics[0].Immature
			}
			if (immature > 0) != (tc.end != end) {
				t.Fatalf("%d immature units", immature)
			}

			dir := t.TempDir()
			csvPath, pqPath := writeUnitTable(t, dir, spec, recs)
			countsPath := writeCounts(t, dir, spec, recs)
			uopts := UnitTableOptions{Unit: "unit_key", Arm: "variant", TS: "exposed_at",
				Segments: []ColumnMap{{facts.Segment, "seg_" + facts.Segment}}}
			for _, mt := range spec.Metrics {
				uopts.Metrics = append(uopts.Metrics, ColumnMap{mt.Name, "m_" + mt.Name})
			}
			fromCSV, _, _ := readUnitTable(t, spec, []Source{oneFile(t, csvPath)}, uopts)
			fromPQ, _, _ := readUnitTable(t, spec, []Source{oneFile(t, pqPath)}, uopts)
			var names []string
			for _, mt := range spec.Metrics {
				names = append(names, mt.Name)
			}
			fromCounts := readCounts(t, spec, []Source{oneFile(t, countsPath)}, CountsOptions{
				Arm: "arm_name", Metric: "kpi", Units: "n_units", Conversions: "n_conv", Immature: "n_immature",
				Segments: []ColumnMap{{facts.Segment, "seg"}}, Metrics: names,
			})

			unitOnly := func(r *experiment.Readout) {
				r.Freshness = nil
				d := &r.Diagnostics
				d.Input, d.RowsRead, d.ExposureRows, d.IgnoredEvents = "", 0, 0, nil
			}
			countsOnly := func(r *experiment.Readout) {
				unitOnly(r)
				d := &r.Diagnostics
				d.UnitsExposed, d.MultiArmUnits, d.TiedUnits = 0, 0, 0
			}
			want := readoutJSON(t, spec, events, unitOnly)
			for _, c := range []struct {
				name string
				tl   experiment.Tally
			}{{"unit table CSV", fromCSV}, {"unit table Parquet", fromPQ}} {
				if got := readoutJSON(t, spec, c.tl, unitOnly); !bytes.Equal(got, want) {
					t.Errorf("%s: readout differs from the event log's:\n%s", c.name, firstDiff(want, got))
				}
				if c.tl.Diag.UnitsExposed != events.Diag.UnitsExposed || c.tl.Diag.MultiArmUnits != events.Diag.MultiArmUnits {
					t.Errorf("%s: units %+v", c.name, c.tl.Diag)
				}
			}
			wantCounts := readoutJSON(t, spec, events, countsOnly)
			if got := readoutJSON(t, spec, fromCounts, countsOnly); !bytes.Equal(got, wantCounts) {
				t.Errorf("counts: readout differs from the event log's:\n%s", firstDiff(wantCounts, got))
			}
			// The fields left out above do differ: the check is not
			// comparing blanks with blanks everywhere.
			full := readoutJSON(t, spec, events, func(*experiment.Readout) {})
			if bytes.Equal(full, readoutJSON(t, spec, fromCSV, func(*experiment.Readout) {})) {
				t.Error("the event log and the unit table agree even on the event-only fields")
			}
		})
	}
}

// firstDiff shows the first line where two texts differ.
func firstDiff(a, b []byte) string {
	x, y := strings.Split(string(a), "\n"), strings.Split(string(b), "\n")
	for i := range min(len(x), len(y)) {
		if x[i] != y[i] {
			return fmt.Sprintf("line %d:\n want %s\n  got %s", i+1, x[i], y[i])
		}
	}
	return fmt.Sprintf("lengths %d and %d lines", len(x), len(y))
}
