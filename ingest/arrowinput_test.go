package ingest

import (
	"bytes"
	"encoding/csv"
	"errors"
	"math/rand/v2"
	"reflect"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
	"github.com/apache/arrow-go/v18/arrow/ipc"
	"github.com/apache/arrow-go/v18/arrow/memory"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/sampledata"
)

// streamRows returns each batch's rows as text, the cells joined by " | ".
func streamRows(recs []arrow.RecordBatch) [][]string {
	var out [][]string
	for _, rec := range recs {
		var rows []string
		for i := 0; i < int(rec.NumRows()); i++ {
			var cells []string
			for _, col := range rec.Columns() {
				cells = append(cells, cellText(col, i))
			}
			rows = append(rows, strings.Join(cells, " | "))
		}
		out = append(out, rows)
	}
	return out
}

// batchReader is what Reader and ArrowReader have in common here.
type batchReader interface {
	Next() bool
	Err() error
	Stats() Stats
	Schema() *arrow.Schema
}

// drain reads every batch, retained (the caller releases them), checking
// each batch's schema against the reader's.
func drain(t testing.TB, r batchReader, get func() arrow.RecordBatch) ([]arrow.RecordBatch, Stats, error) {
	t.Helper()
	var recs []arrow.RecordBatch
	for r.Next() {
		rec := get()
		if !rec.Schema().Equal(r.Schema()) {
			t.Fatalf("batch schema %v, want %v", rec.Schema(), r.Schema())
		}
		rec.Retain()
		recs = append(recs, rec)
	}
	return recs, r.Stats(), r.Err()
}

func releaseAll(recs []arrow.RecordBatch) {
	for _, r := range recs {
		r.Release()
	}
}

// readStream reads input batches through NewArrowReader with opts, the
// output from a checked allocator; it checks that the output holds no
// memory once released.
func readStream(t *testing.T, schema *arrow.Schema, in []arrow.RecordBatch, opts Options) ([]arrow.RecordBatch, Stats, error) {
	t.Helper()
	out := memory.NewCheckedAllocator(memory.NewGoAllocator())
	t.Cleanup(func() { out.AssertSize(t, 0) })
	opts.Allocator = out
	rr, err := array.NewRecordReader(schema, in)
	if err != nil {
		t.Fatal(err)
	}
	defer rr.Release()
	ar, err := NewArrowReader(rr, "arrow stream", opts)
	if err != nil {
		return nil, Stats{}, err
	}
	defer ar.Close()
	recs, st, err := drain(t, ar, ar.RecordBatch)
	t.Cleanup(func() { releaseAll(recs) })
	return recs, st, err
}

// writeArrowTestLog writes the demo scenario scaled to units units (seed
// 7) as CSV with the columns of sampledata.Columns, its timestamps cut to
// whole seconds so that every timestamp unit holds them exactly.
func writeArrowTestLog(t testing.TB, units int) []byte {
	t.Helper()
	cfg := sampledata.DemoConfig()
	cfg.Users, cfg.NeverExposedUsers = units, units/40
	var buf bytes.Buffer
	w := csv.NewWriter(&buf)
	w.Write(sampledata.Columns())
	err := sampledata.Generate(cfg, rand.NewPCG(7, 7), func(e sampledata.Event) error {
		return w.Write([]string{e.User, e.TS.Truncate(time.Second).UTC().Format(time.RFC3339), e.Name, e.Experiment, e.Arm, e.Platform})
	})
	w.Flush()
	if err == nil {
		err = w.Error()
	}
	if err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

// goColumn is one column of a logical batch as Go values: text (nil for a
// null) or, for ts, nanoseconds.
type goColumn struct {
	text []*string
	ts   []int64
}

// goColumns takes rows [from, to) of a logical batch as Go values.
func goColumns(rec arrow.RecordBatch, from, to int) []goColumn {
	cols := make([]goColumn, rec.NumCols())
	for j, col := range rec.Columns() {
		for i := from; i < to; i++ {
			switch c := col.(type) {
			case *array.Timestamp:
				cols[j].ts = append(cols[j].ts, int64(c.Value(i)))
			case *array.String:
				var v *string
				if c.IsValid(i) {
					s := c.Value(i)
					v = &s
				}
				cols[j].text = append(cols[j].text, v)
			}
		}
	}
	return cols
}

// encoder builds input arrays of one type from Go values.
type encoder struct {
	mem  memory.Allocator
	dict map[string]arrow.Array // shared dictionaries by column, when shared
}

// textArray encodes text values as typ; an integer type takes the digits
// after the "u" of the generator's user ids.
func (e *encoder) textArray(t testing.TB, col string, typ arrow.DataType, vals []*string) arrow.Array {
	t.Helper()
	if dt, ok := typ.(*arrow.DictionaryType); ok {
		return e.dictArray(t, col, dt, vals)
	}
	b := array.NewBuilder(e.mem, typ)
	defer b.Release()
	for _, v := range vals {
		switch {
		case v == nil:
			b.AppendNull()
		case arrow.IsInteger(typ.ID()):
			n, err := strconv.Atoi(strings.TrimPrefix(*v, "u"))
			if err != nil {
				t.Fatal(err)
			}
			if err := b.AppendValueFromString(strconv.Itoa(n)); err != nil {
				t.Fatal(err)
			}
		default:
			if err := b.AppendValueFromString(*v); err != nil {
				t.Fatal(err)
			}
		}
	}
	return b.NewArray()
}

// dictArray encodes text values as a dictionary array. With e.dict set,
// every batch shares one dictionary per column: the values of the first
// batch, then those of later batches appended (each batch's dictionary is
// a new array holding the entries so far).
func (e *encoder) dictArray(t testing.TB, col string, dt *arrow.DictionaryType, vals []*string) arrow.Array {
	t.Helper()
	var entries []string
	if e.dict != nil {
		if d := e.dict[col]; d != nil {
			for i := 0; i < d.Len(); i++ {
				entries = append(entries, d.ValueStr(i))
			}
		}
	}
	pos := map[string]int{}
	for i, s := range entries {
		pos[s] = i
	}
	ib := array.NewBuilder(e.mem, dt.IndexType)
	defer ib.Release()
	for _, v := range vals {
		if v == nil {
			ib.AppendNull()
			continue
		}
		i, ok := pos[*v]
		if !ok {
			i = len(entries)
			pos[*v] = i
			entries = append(entries, *v)
		}
		if err := ib.AppendValueFromString(strconv.Itoa(i)); err != nil {
			t.Fatal(err)
		}
	}
	idx := ib.NewArray()
	defer idx.Release()
	var dict arrow.Array
	if e.dict != nil && e.dict[col] != nil && e.dict[col].Len() == len(entries) {
		dict = e.dict[col] // unchanged: the very same dictionary
		dict.Retain()
	} else {
		vb := array.NewBuilder(e.mem, dt.ValueType)
		for _, s := range entries {
			vb.AppendValueFromString(s)
		}
		dict = vb.NewArray()
		vb.Release()
		if e.dict != nil {
			if old := e.dict[col]; old != nil {
				old.Release()
			}
			dict.Retain()
			e.dict[col] = dict
		}
	}
	defer dict.Release()
	return array.NewDictionaryArray(dt, idx, dict)
}

// tsArray encodes nanosecond timestamps as typ: a timestamp (any unit), an
// integer count of unitNanos, date32 (days) or text (RFC 3339).
func (e *encoder) tsArray(t testing.TB, typ arrow.DataType, ns []int64, unitNanos int64) arrow.Array {
	t.Helper()
	switch typ := typ.(type) {
	case *arrow.TimestampType:
		b := array.NewTimestampBuilder(e.mem, typ)
		defer b.Release()
		for _, v := range ns {
			b.Append(arrow.Timestamp(v / int64(typ.Unit.Multiplier())))
		}
		return b.NewArray()
	case *arrow.StringType, *arrow.LargeStringType, *arrow.DictionaryType:
		var text []*string
		for _, v := range ns {
			s := time.Unix(0, v).UTC().Format(time.RFC3339Nano)
			text = append(text, &s)
		}
		return e.textArray(t, "ts", typ, text)
	}
	b := array.NewBuilder(e.mem, typ)
	defer b.Release()
	for _, v := range ns {
		if err := b.AppendValueFromString(strconv.FormatInt(v/unitNanos, 10)); err != nil {
			t.Fatal(err)
		}
	}
	return b.NewArray()
}

func (e *encoder) release() {
	for _, d := range e.dict {
		d.Release()
	}
}

// streamVariant is one way to write the logical table as an Arrow stream.
type streamVariant struct {
	name       string
	user, text arrow.DataType // user_id; event, experiment, arm, platform
	ts         arrow.DataType
	epochUnit  string // Mapping.EpochUnit for an integer ts
	shared     bool   // one dictionary per column for all batches
	ipc        bool   // through an IPC stream
	filter     bool   // Options.Events from the tallier
}

func dictOf(index, value arrow.DataType) arrow.DataType {
	return &arrow.DictionaryType{IndexType: index, ValueType: value}
}

// encodeStream writes the rows of the logical batches as input batches of
// inRows rows in the variant's types, the columns in another order than
// the logical table's, with an extra column that is not mapped.
func encodeStream(t testing.TB, mem memory.Allocator, v streamVariant, logical []arrow.RecordBatch, inRows int) (*arrow.Schema, []arrow.RecordBatch) {
	t.Helper()
	// Logical order: user, ts, event, experiment, arm, platform.
	names := []string{"user_id", "ts", "event", "experiment", "arm", "platform"}
	types := []arrow.DataType{v.user, v.ts, v.text, v.text, v.text, v.text}
	order := []int{2, 5, 0, 3, 1, 4} // event, platform, user_id, experiment, ts, arm
	fields := []arrow.Field{{Name: "score", Type: arrow.PrimitiveTypes.Float64, Nullable: true}}
	for _, j := range order {
		fields = append(fields, arrow.Field{Name: names[j], Type: types[j], Nullable: true})
	}
	schema := arrow.NewSchema(fields, nil)
	enc := &encoder{mem: mem}
	if v.shared {
		enc.dict = map[string]arrow.Array{}
	}
	defer enc.release()
	unit := epochUnitNanos(v.epochUnit)
	var in []arrow.RecordBatch
	var pending []goColumn
	flush := func() {
		if len(pending) == 0 || len(pending[1].ts) == 0 {
			return
		}
		n := len(pending[1].ts)
		fb := array.NewFloat64Builder(mem)
		for range n {
			fb.AppendNull()
		}
		cols := []arrow.Array{fb.NewArray()}
		fb.Release()
		for _, j := range order {
			if j == colTS {
				cols = append(cols, enc.tsArray(t, v.ts, pending[j].ts, unit))
			} else {
				cols = append(cols, enc.textArray(t, names[j], types[j], pending[j].text))
			}
		}
		in = append(in, array.NewRecordBatch(schema, cols, int64(n)))
		for _, c := range cols {
			c.Release()
		}
		pending = nil
	}
	for _, rec := range logical {
		for from := 0; from < int(rec.NumRows()); {
			have := 0
			if pending != nil {
				have = len(pending[1].ts)
			}
			to := min(int(rec.NumRows()), from+inRows-have)
			part := goColumns(rec, from, to)
			if pending == nil {
				pending = part
			} else {
				for j := range pending {
					pending[j].text = append(pending[j].text, part[j].text...)
					pending[j].ts = append(pending[j].ts, part[j].ts...)
				}
			}
			if len(pending[1].ts) == inRows {
				flush()
			}
			from = to
		}
	}
	flush()
	return schema, in
}

// throughIPC writes batches to an Arrow IPC stream and reads them back
// (dictionaries written once and replaced or extended as they change).
func throughIPC(t *testing.T, mem memory.Allocator, schema *arrow.Schema, in []arrow.RecordBatch) []arrow.RecordBatch {
	t.Helper()
	var buf bytes.Buffer
	w := ipc.NewWriter(&buf, ipc.WithSchema(schema), ipc.WithAllocator(mem))
	for _, rec := range in {
		if err := w.Write(rec); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	r, err := ipc.NewReader(&buf, ipc.WithAllocator(mem))
	if err != nil {
		t.Fatal(err)
	}
	defer r.Release()
	var out []arrow.RecordBatch
	for r.Next() {
		rec := r.RecordBatch()
		rec.Retain()
		out = append(out, rec)
	}
	if err := r.Err(); err != nil {
		t.Fatal(err)
	}
	return out
}

// demoSpec is the demo scenario's experiment with its platform segment.
func demoSpec() experiment.Spec {
	facts := sampledata.DemoSpec()
	start, end := facts.Start, facts.End
	spec := experiment.Spec{Key: facts.Experiment, ExposureEvent: facts.ExposureEvent, Control: facts.Control,
		Start: &start, End: &end, Segments: []string{facts.Segment}}
	for _, a := range facts.Arms {
		spec.Arms = append(spec.Arms, a.Name)
	}
	for _, m := range facts.Metrics {
		spec.Metrics = append(spec.Metrics, experiment.Metric{Name: m.Event, Events: []string{m.Event}, Window: m.Window})
	}
	return spec
}

// tallyOf tallies batches as the pipeline does: the batches, then the rows
// the reader left out by the event filter.
func tallyOf(t testing.TB, spec experiment.Spec, recs []arrow.RecordBatch, st Stats) experiment.Tally {
	t.Helper()
	tl, err := experiment.NewTallier(spec)
	if err != nil {
		t.Fatal(err)
	}
	for _, rec := range recs {
		if err := tl.Add(rec); err != nil {
			t.Fatal(err)
		}
	}
	tl.AddFiltered(st.Filtered, st.FilteredMaxTS)
	tally, err := tl.Tally()
	if err != nil {
		t.Fatal(err)
	}
	return tally
}

// The same rows read from a CSV file through NewReader and as an Arrow
// stream in many encodings give the same batches, Stats and tallies. The
// file reader is the reference: the stream must reproduce it exactly (the
// CSV reader fills every batch to BatchSize, as ArrowReader does, so even
// the batch boundaries agree). Integer user ids are the generator's ids
// without their "u" and zeros, so rows compare with the ids rewritten that
// way and the tallies (which only tell units apart) are the same.
func TestArrowReaderMatchesFile(t *testing.T) {
	data := writeArrowTestLog(t, 3000)
	s, ls, vw := arrow.BinaryTypes.String, arrow.BinaryTypes.LargeString, arrow.BinaryTypes.StringView
	tsUS := &arrow.TimestampType{Unit: arrow.Microsecond, TimeZone: "UTC"}
	p := arrow.PrimitiveTypes
	variants := []streamVariant{
		{name: "utf8, timestamp[us, UTC]", user: s, text: s, ts: tsUS},
		{name: "large_utf8, timestamp[s, Asia/Tokyo]", user: ls, text: ls, ts: &arrow.TimestampType{Unit: arrow.Second, TimeZone: "Asia/Tokyo"}},
		{name: "utf8_view, timestamp[ms, America/New_York]", user: vw, text: vw, ts: &arrow.TimestampType{Unit: arrow.Millisecond, TimeZone: "America/New_York"}},
		{name: "dictionary<int32, utf8> per batch, timestamp[ns] without zone", user: dictOf(p.Int32, s), text: dictOf(p.Int32, s), ts: &arrow.TimestampType{Unit: arrow.Nanosecond}},
		{name: "dictionary<int8, large_utf8> shared, filtered", user: ls, text: dictOf(p.Int8, ls), ts: tsUS, shared: true, filter: true},
		{name: "dictionary<uint16, utf8> through IPC", user: dictOf(p.Uint16, s), text: dictOf(p.Uint16, s), ts: tsUS, shared: true, ipc: true},
		{name: "int64 user, int64 epoch ms", user: p.Int64, text: s, ts: p.Int64, epochUnit: "ms"},
		{name: "uint32 user, int32 epoch s, filtered", user: p.Uint32, text: dictOf(p.Int64, s), ts: p.Int32, epochUnit: "s", filter: true},
		{name: "text ts", user: s, text: s, ts: s},
		{name: "dictionary text ts", user: s, text: s, ts: dictOf(p.Int16, s), shared: true},
	}
	spec := demoSpec()
	tl, err := experiment.NewTallier(spec)
	if err != nil {
		t.Fatal(err)
	}
	for _, v := range variants {
		t.Run(v.name, func(t *testing.T) {
			in := memory.NewCheckedAllocator(memory.NewGoAllocator())
			defer in.AssertSize(t, 0)
			mapping := DefaultMapping()
			mapping.Segments = []string{"platform"}
			opts := Options{Mapping: mapping, ExposureEvent: spec.ExposureEvent, BatchSize: 1000}
			if v.filter {
				opts.Events = tl.Events()
			}
			readFile := func(opts Options) ([]arrow.RecordBatch, Stats) {
				fr, err := NewReader([]Source{BytesSource("events.csv", data)}, opts)
				if err != nil {
					t.Fatal(err)
				}
				recs, st, err := drain(t, fr, fr.Record)
				fr.Close()
				t.Cleanup(func() { releaseAll(recs) })
				if err != nil {
					t.Fatal(err)
				}
				return recs, st
			}
			want, wantSt := readFile(opts)
			if wantSt.RowsRead < 10000 || wantSt.Rows < 5000 || (v.filter && wantSt.Filtered == 0) {
				t.Fatalf("the log is too small to tell: %+v", wantSt)
			}
			// The stream holds every row of the file, whatever the filter.
			all, _ := readFile(Options{Mapping: mapping, BatchSize: 1000})
			schema, stream := encodeStream(t, in, v, all, 700)
			if v.ipc {
				read := throughIPC(t, in, schema, stream)
				releaseAll(stream)
				stream = read
			}
			opts.Mapping.EpochUnit = v.epochUnit
			got, gotSt, err := readStream(t, schema, stream, opts)
			releaseAll(stream)
			if err != nil {
				t.Fatal(err)
			}
			if !reflect.DeepEqual(gotSt, wantSt) {
				t.Errorf("stats\n got %+v\nwant %+v", gotSt, wantSt)
			}
			wantRows, gotRows := streamRows(want), streamRows(got)
			if arrow.IsInteger(v.user.ID()) {
				for _, b := range wantRows {
					for i, r := range b {
						user, rest, _ := strings.Cut(r, " | ")
						n, _ := strconv.Atoi(strings.TrimPrefix(user, "u"))
						b[i] = strconv.Itoa(n) + " | " + rest
					}
				}
			} else if len(got) == len(want) {
				for i := range got {
					if !array.RecordEqual(got[i], want[i]) {
						t.Errorf("batch %d differs", i)
					}
				}
			}
			if !reflect.DeepEqual(gotRows, wantRows) {
				t.Errorf("rows differ: got %d batches, want %d", len(gotRows), len(wantRows))
			}
			if g, w := tallyOf(t, spec, got, gotSt), tallyOf(t, spec, want, wantSt); !reflect.DeepEqual(g, w) {
				t.Errorf("tally\n got %+v\nwant %+v", g, w)
			}
		})
	}
}

// jsonBatch makes a batch of schema from one JSON array per column (see
// array.FromJSON); a dictionary column is given as "indices|dictionary".
func jsonBatch(t *testing.T, mem memory.Allocator, schema *arrow.Schema, cols ...string) arrow.RecordBatch {
	t.Helper()
	var arrs []arrow.Array
	for i, js := range cols {
		var a arrow.Array
		var err error
		if dt, ok := schema.Field(i).Type.(*arrow.DictionaryType); ok {
			idx, dict, _ := strings.Cut(js, "|")
			a, err = array.DictArrayFromJSON(mem, dt, idx, dict)
		} else {
			a, _, err = array.FromJSON(mem, schema.Field(i).Type, strings.NewReader(js))
		}
		if err != nil {
			t.Fatalf("column %d: %v", i, err)
		}
		defer a.Release()
		arrs = append(arrs, a)
	}
	return array.NewRecordBatch(schema, arrs, int64(arrs[0].Len()))
}

func fields(nameTypes ...any) *arrow.Schema {
	var fs []arrow.Field
	for i := 0; i < len(nameTypes); i += 2 {
		fs = append(fs, arrow.Field{Name: nameTypes[i].(string), Type: nameTypes[i+1].(arrow.DataType), Nullable: true})
	}
	return arrow.NewSchema(fs, nil)
}

// badStream is a stream of 7 rows in two batches, 2 good and 5 bad, one
// of each reason a typed stream can have; the comments give each row's
// position in the stream (counted from 1) and its verdict.
func badStream(t *testing.T, mem memory.Allocator) (*arrow.Schema, []arrow.RecordBatch) {
	schema := fields("user_id", arrow.BinaryTypes.String,
		"ts", &arrow.TimestampType{Unit: arrow.Millisecond, TimeZone: "Europe/Berlin"},
		"event", dictOf(arrow.PrimitiveTypes.Int8, arrow.BinaryTypes.LargeString),
		"experiment", arrow.BinaryTypes.LargeString,
		"arm", arrow.BinaryTypes.StringView)
	events := `["exposure","view","purchase"]`
	return schema, []arrow.RecordBatch{
		jsonBatch(t, mem, schema,
			`["u1", null, "u2"]`, // 1: good; 2: null_user; 3: null_timestamp
			`[1000, 2000, null]`, //
			`[0, 1, 1]|`+events,  //
			`["e1", null, null]`, //
			`["a", null, null]`), //
		jsonBatch(t, mem, schema,
			`["u3", "u4", "u5", "u6"]`,             // 4: null_event; 5: exposure_without_arm
			`[3000, 4000, 9999999999999999, 5000]`, // 6: timestamp_out_of_range (> 2^63-1 ns); 7: good
			`[null, 0, 1, 2]|`+events,
			`[null, "e1", null, null]`,
			`[null, null, null, null]`),
	}
}

// badCSV holds the rows of badStream as CSV: the same reasons on lines 2
// to 8 (the header is line 1).
const badCSV = `user_id,ts,event,experiment,arm
u1,1970-01-01T00:00:01Z,exposure,e1,a
,1970-01-01T00:00:02Z,view,,
u2,,view,,
u3,1970-01-01T00:00:03Z,,,
u4,1970-01-01T00:00:04Z,exposure,e1,
u5,9999-01-01T00:00:00Z,view,,
u6,1970-01-01T00:00:05Z,purchase,,
`

func TestArrowReaderBadRows(t *testing.T) {
	// Counted by hand from the comments in badStream, in the order of
	// the Reason constants.
	allBad := []BadRowCount{
		{Reason: "null_user", Count: 1},
		{Reason: "null_timestamp", Count: 1},
		{Reason: "timestamp_out_of_range", Count: 1},
		{Reason: "null_event", Count: 1},
		{Reason: "exposure_without_arm", Count: 1},
	}
	allFirst := []string{
		`arrow stream:2: column "user_id": null or empty user id`,
		`arrow stream:3: column "ts": null timestamp`,
		`arrow stream:6: column "ts": timestamp "9999999999999999 ms" is outside the range of nanosecond timestamps (1677-09-21 to 2262-04-11)`,
		`arrow stream:4: column "event": null or empty event name`,
		`arrow stream:5: column "arm": exposure row without an arm`,
	}
	good := []string{
		"u1 | 1970-01-01T00:00:01Z | exposure | e1 | a",
		"u6 | 1970-01-01T00:00:05Z | purchase | ∅ | ∅",
	}
	tests := []struct {
		name     string
		maxRows  int64
		maxShare float64
		rows     []string
		read     int64
		bad      []BadRowCount
		err      string
	}{
		{name: "no budget: the first bad row stops", read: 2, bad: allBad[:1], err: allFirst[0]},
		{name: "no limit", maxRows: NoLimit, rows: good, read: 7, bad: allBad},
		// The third bad row (stream row 4) is one too many.
		{name: "count exceeded", maxRows: 2, read: 4, bad: []BadRowCount{allBad[0], allBad[1], allBad[3]},
			err: "bad-row budget exceeded: 3 bad rows, more than the 2 allowed (max bad rows); last bad row: " + allFirst[3]},
		// 5 of 7 is 71.43%, more than 70%; found once all rows are read.
		{name: "share exceeded", maxShare: 0.7, rows: good, read: 7, bad: allBad,
			err: "bad-row budget exceeded: 5 bad rows of 7 read (71.43%), more than the 70% allowed (max bad share); last bad row: " + allFirst[2]},
		{name: "share within", maxShare: 0.72, rows: good, read: 7, bad: allBad},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			mem := memory.NewCheckedAllocator(memory.NewGoAllocator())
			defer mem.AssertSize(t, 0)
			schema, in := badStream(t, mem)
			opts := Options{Mapping: DefaultMapping(), ExposureEvent: "exposure", MaxBadRows: tc.maxRows, MaxBadShare: tc.maxShare}
			recs, st, err := readStream(t, schema, in, opts)
			releaseAll(in)
			if tc.err == "" && err != nil || tc.err != "" && (err == nil || err.Error() != tc.err) {
				t.Fatalf("error %v, want %q", err, tc.err)
			}
			var budget *BudgetError
			if tc.err != "" && errors.As(err, &budget) != (tc.maxRows != 0 || tc.maxShare != 0) {
				t.Errorf("error %T: a budget error only with a budget", err)
			}
			var rows []string
			for _, b := range streamRows(recs) {
				rows = append(rows, b...)
			}
			if !slices.Equal(rows, tc.rows) {
				t.Errorf("rows %q, want %q", rows, tc.rows)
			}
			if st.RowsRead != tc.read || !slices.Equal(st.BadRows, tc.bad) {
				t.Errorf("read %d, bad %v; want %d, %v", st.RowsRead, st.BadRows, tc.read, tc.bad)
			}
			if st.Files != 1 || st.RowsRead != st.Rows+st.Filtered+sumBad(st.BadRows) && err == nil {
				t.Errorf("stats %+v do not add up", st)
			}
			for i, e := range st.BadRowExamples {
				if want := allFirst[slices.IndexFunc(allBad, func(r BadRowCount) bool { return r.Reason == st.BadRows[i].Reason })]; e.Error() != want {
					t.Errorf("first %s row: %s, want %s", st.BadRows[i].Reason, e, want)
				}
			}

			// The CSV file of the same rows: the same reasons and counts.
			_, cst, _ := readAll(t, []Source{BytesSource("b.csv", []byte(badCSV))}, opts)
			if cst.RowsRead != st.RowsRead || !slices.Equal(cst.BadRows, st.BadRows) {
				t.Errorf("the CSV file: read %d, bad %v; the stream %d, %v", cst.RowsRead, cst.BadRows, st.RowsRead, st.BadRows)
			}
		})
	}
}

func sumBad(rs []BadRowCount) int64 {
	var n int64
	for _, r := range rs {
		n += r.Count
	}
	return n
}

// Timestamps of other types and text: each value converted by hand.
func TestArrowReaderTimestampTypes(t *testing.T) {
	tests := []struct {
		name  string
		typ   arrow.DataType
		unit  string
		json  string
		want  []string // ts of the delivered rows
		first string   // the first bad row, "" for none
	}{
		// date -u -d @$((20000*86400)) = Fri Oct 4 00:00:00 UTC 2024 (GNU date 9.1).
		{"date32", arrow.FixedWidthTypes.Date32, "", `["2024-10-04", "1969-12-31"]`,
			[]string{"2024-10-04T00:00:00Z", "1969-12-31T00:00:00Z"}, ""},
		// 2^31-1 days: date -u -d @$((2147483647*86400)) prints
		// 5881580-07-11T00:00:00Z (GNU date 9.1), far out of range.
		{"date32 out of range", arrow.FixedWidthTypes.Date32, "", `[2147483647, 0]`, []string{"1970-01-01T00:00:00Z"},
			`arrow stream:1: column "ts": timestamp "5881580-07-11T00:00:00Z" is outside the range of nanosecond timestamps (1677-09-21 to 2262-04-11)`},
		// 1500 ms after the epoch; -1 ms is the last millisecond of 1969.
		{"date64", arrow.FixedWidthTypes.Date64, "", `[1500, -1]`,
			[]string{"1970-01-01T00:00:01.5Z", "1969-12-31T23:59:59.999Z"}, ""},
		// date -u -d @-128 and @127 (GNU date 9.1).
		{"int8 epoch s", arrow.PrimitiveTypes.Int8, "s", `[-128, 127]`,
			[]string{"1969-12-31T23:57:52Z", "1970-01-01T00:02:07Z"}, ""},
		{"uint16 epoch us", arrow.PrimitiveTypes.Uint16, "us", `[65535, 0]`,
			[]string{"1970-01-01T00:00:00.065535Z", "1970-01-01T00:00:00Z"}, ""},
		// 10:30 at +02:00 is 08:30 UTC.
		{"text", arrow.BinaryTypes.String, "", `["2026-03-15T10:30:00+02:00", "2026-13-01"]`,
			[]string{"2026-03-15T08:30:00Z"},
			`arrow stream:2: column "ts": cannot parse "2026-13-01" as a timestamp (want RFC 3339 or YYYY-MM-DD[ HH:MM:SS[.frac]])`},
		// With an epoch unit a text integer counts that unit, as in CSV:
		// date -u -d @1704112496 = 2024-01-01 12:34:56 UTC (GNU date 9.1).
		{"text epoch ms", arrow.BinaryTypes.LargeString, "ms", `["1704112496123", ""]`,
			[]string{"2024-01-01T12:34:56.123Z"}, `arrow stream:2: column "ts": null timestamp`},
		// The int64 minimum of seconds is before 1677.
		{"timestamp s out of range", &arrow.TimestampType{Unit: arrow.Second}, "", `[-9223372036854775808, 0]`,
			[]string{"1970-01-01T00:00:00Z"},
			`arrow stream:1: column "ts": timestamp "-9223372036854775808 s" is outside the range of nanosecond timestamps (1677-09-21 to 2262-04-11)`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			mem := memory.NewCheckedAllocator(memory.NewGoAllocator())
			defer mem.AssertSize(t, 0)
			schema := fields("user_id", arrow.BinaryTypes.String, "ts", tc.typ, "event", arrow.BinaryTypes.String)
			in := []arrow.RecordBatch{jsonBatch(t, mem, schema, `["u1", "u2"]`, tc.json, `["view", "view"]`)}
			m := Mapping{User: "user_id", TS: "ts", Event: "event", EpochUnit: tc.unit}
			recs, st, err := readStream(t, schema, in, Options{Mapping: m, MaxBadRows: NoLimit})
			releaseAll(in)
			if err != nil {
				t.Fatal(err)
			}
			var got []string
			for _, b := range streamRows(recs) {
				for _, r := range b {
					got = append(got, strings.Split(r, " | ")[1])
				}
			}
			if !slices.Equal(got, tc.want) {
				t.Errorf("ts %q, want %q", got, tc.want)
			}
			var first string
			if len(st.BadRowExamples) > 0 {
				first = st.BadRowExamples[0].Error()
			}
			if first != tc.first {
				t.Errorf("first bad row %q, want %q", first, tc.first)
			}
		})
	}
}

func TestArrowReaderColumnErrors(t *testing.T) {
	s := arrow.BinaryTypes.String
	ms := &arrow.TimestampType{Unit: arrow.Millisecond, TimeZone: "UTC"}
	p := arrow.PrimitiveTypes
	seg := DefaultMapping()
	seg.Segments = []string{"country"}
	ms64 := DefaultMapping()
	ms64.EpochUnit = "ms"
	tests := []struct {
		name   string
		schema *arrow.Schema
		m      Mapping
		want   string
		is     error
	}{
		{"missing", fields("user_id", s, "ts", ms, "event", s, "experiment", s, "arm", s), seg,
			`arrow stream: column "country": missing column (the stream has: user_id, ts, event, experiment, arm)`, ErrMissingColumn},
		{"float user", fields("user_id", p.Float64, "ts", ms, "event", s, "experiment", s, "arm", s), DefaultMapping(),
			`arrow stream: column "user_id": unsupported column type (cannot read float64 as text)`, ErrColumnType},
		{"integer ts without a unit", fields("user_id", s, "ts", p.Int64, "event", s, "experiment", s, "arm", s), DefaultMapping(),
			`arrow stream: column "ts": unsupported column type (integer timestamps need an epoch unit (s, ms, us or ns))`, ErrColumnType},
		{"uint64 ts", fields("user_id", s, "ts", p.Uint64, "event", s, "experiment", s, "arm", s), ms64,
			`arrow stream: column "ts": unsupported column type (cannot read uint64 as a timestamp)`, ErrColumnType},
		{"timestamp event", fields("user_id", s, "ts", ms, "event", ms, "experiment", s, "arm", s), DefaultMapping(),
			`arrow stream: column "event": unsupported column type (cannot read timestamp[ms, tz=UTC] as text)`, ErrColumnType},
		{"dictionary of integers", fields("user_id", s, "ts", ms, "event", s, "experiment", s, "arm", dictOf(p.Int32, p.Int64)), DefaultMapping(),
			`arrow stream: column "arm": unsupported column type (cannot read dictionary<values=int64, indices=int32, ordered=false> as text)`, ErrColumnType},
		{"named twice", fields("user_id", s, "ts", ms, "event", s, "event", s, "experiment", s, "arm", s), DefaultMapping(),
			`arrow stream: column "event": unsupported column type (the schema names it more than once)`, ErrColumnType},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			rr, err := array.NewRecordReader(tc.schema, nil)
			if err != nil {
				t.Fatal(err)
			}
			defer rr.Release()
			_, err = NewArrowReader(rr, "arrow stream", Options{Mapping: tc.m})
			var ce *ColumnError
			if !errors.As(err, &ce) || !errors.Is(err, tc.is) || err.Error() != tc.want {
				t.Errorf("error %v\nwant %s", err, tc.want)
			}
		})
	}
	if _, err := NewArrowReader(nil, "arrow stream", Options{Mapping: DefaultMapping()}); err == nil {
		t.Error("no error for a nil reader")
	}
	if _, err := NewArrowReader(nil, "arrow stream", Options{Mapping: DefaultMapping(), BatchSize: -1}); err == nil || err.Error() != "batch size -1: must be positive" {
		t.Errorf("option error %v, want NewReader's", err)
	}
}

// A stream that breaks its own promises stops with an error naming the
// stream and the batch, never a panic, and leaks nothing.
func TestArrowReaderBrokenStream(t *testing.T) {
	s := arrow.BinaryTypes.String
	ts := &arrow.TimestampType{Unit: arrow.Second}
	schema := fields("user_id", s, "ts", ts, "event", dictOf(arrow.PrimitiveTypes.Int32, s))
	errUpstream := errors.New("the query was cancelled")
	tests := []struct {
		name  string
		batch func(memory.Allocator) arrow.RecordBatch // the second batch
		err   error                                    // the input reader's error after it
		want  string
	}{
		{"reader error", nil, errUpstream, "arrow stream: the query was cancelled"},
		{"dictionary index out of range", func(mem memory.Allocator) arrow.RecordBatch {
			return jsonBatch(t, mem, schema, `["u1", "u2"]`, `[1, 2]`, `[0, 5]|["view", "buy"]`)
		}, nil, `arrow stream: batch 2: column "event": dictionary index 5 of a dictionary of 2 values (row 2 of the batch)`},
		{"type other than the schema's", func(mem memory.Allocator) arrow.RecordBatch {
			other := fields("user_id", s, "ts", ts, "event", s)
			return jsonBatch(t, mem, other, `["u1"]`, `[1]`, `["view"]`)
		}, nil, `arrow stream: batch 2: column "event": type utf8, the schema says dictionary<values=utf8, indices=int32, ordered=false>`},
		{"offsets past the data", func(mem memory.Allocator) arrow.RecordBatch {
			good := jsonBatch(t, mem, schema, `["u1", "u2"]`, `[1, 2]`, `[0, 0]|["view"]`)
			defer good.Release()
			// The last offset is within the data, the one before it
			// past the last: the second value runs backwards.
			offs := memory.NewBufferBytes(arrow.Int32Traits.CastToBytes([]int32{0, 5, 4}))
			data := memory.NewBufferBytes([]byte("u1u2u"))
			d := array.NewData(s, 2, []*memory.Buffer{nil, offs, data}, nil, 0, 0)
			defer d.Release()
			user := array.MakeFromData(d)
			defer user.Release()
			return array.NewRecordBatch(schema, []arrow.Array{user, good.Column(1), good.Column(2)}, 2)
		}, nil, "arrow stream: batch 2: malformed arrow data: "},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			mem := memory.NewCheckedAllocator(memory.NewGoAllocator())
			defer mem.AssertSize(t, 0)
			out := memory.NewCheckedAllocator(memory.NewGoAllocator())
			defer out.AssertSize(t, 0)
			rr := array.ReaderFromIter(schema, func(yield func(arrow.RecordBatch, error) bool) {
				if !yield(jsonBatch(t, mem, schema, `["u0"]`, `[0]`, `[0]|["view"]`), nil) {
					return
				}
				if tc.batch != nil && !yield(tc.batch(mem), nil) {
					return
				}
				if tc.err != nil {
					yield(nil, tc.err)
				}
			})
			defer rr.Release()
			ar, err := NewArrowReader(rr, "arrow stream", Options{Mapping: Mapping{User: "user_id", TS: "ts", Event: "event"}, Allocator: out, BatchSize: 1})
			if err != nil {
				t.Fatal(err)
			}
			defer ar.Close()
			if !ar.Next() || ar.RecordBatch().NumRows() != 1 {
				t.Fatalf("first batch: %v", ar.Err())
			}
			for ar.Next() {
			}
			err = ar.Err()
			if err == nil || !strings.HasPrefix(err.Error(), tc.want) {
				t.Errorf("error %v, want %s", err, tc.want)
			}
			if tc.err != nil && !errors.Is(err, tc.err) {
				t.Errorf("error %v does not wrap the reader's", err)
			}
		})
	}
}

// ArrowReader is an array.RecordReader: the last Release closes it, and the
// input reader it retained is released then.
func TestArrowReaderRetainRelease(t *testing.T) {
	mem := memory.NewCheckedAllocator(memory.NewGoAllocator())
	defer mem.AssertSize(t, 0)
	schema, in := badStream(t, mem)
	rr, err := array.NewRecordReader(schema, in)
	releaseAll(in)
	if err != nil {
		t.Fatal(err)
	}
	var r array.RecordReader
	ar, err := NewArrowReader(rr, "arrow stream", Options{Mapping: DefaultMapping(), ExposureEvent: "exposure", MaxBadRows: NoLimit, Allocator: mem})
	rr.Release() // the ArrowReader holds its own reference
	if err != nil {
		t.Fatal(err)
	}
	defer ar.Close() // after the last Release, Close does nothing
	r = ar
	r.Retain()
	r.Release()
	if !r.Next() || r.RecordBatch().NumRows() != 2 || !r.Schema().Equal(ar.plan.schema) {
		t.Fatalf("Next after Retain and Release: %v", r.Err())
	}
	if ar.Progress() != 7 {
		t.Errorf("progress %d, want the 7 rows read", ar.Progress())
	}
	r.Release()
	if r.Next() {
		t.Error("Next true after the last Release")
	}
}

// An external check: a stream of nine rows whose tally is worked out by
// hand from the event semantics of DESIGN.md. Users are int64 ids, ts are
// seconds (zone Asia/Tokyo: the instant counts), events and arms
// dictionaries (each batch its own); the spec is experiment exp1, arms a
// (control) and b, metric purchase within W = 24 h = 86400 s, window end at
// 200000 s (after every t0 + W, so no unit is immature).
//
//	row user  ts     event      exp   arm
//	1   101   1000   exposure   exp1  a     t0(101) = 1000, arm a
//	2   102   1000   exposure   exp1  b     t0(102) = 1000, arm b
//	3   103   1100   exposure   exp1  a     t0(103) = 1100, arm a
//	4   101   2000   purchase               in [1000, 87400): 101 converts
//	5   102   87400  purchase               = t0 + W: outside the window of attribution
//	--- batch 2
//	6   103   1050   purchase               before t0(103)
//	7   104   1200   purchase               104 never exposed
//	8   104   1300   page_view              not a metric event (left out by the filter)
//	9   105   1400   exposure   exp2  a     another experiment
//
// So arm a: 2 units exposed, 1 converted; arm b: 1 unit, 0 converted;
// 3 exposure rows, 1 of another experiment, 4 metric events (rows 4-7):
// 1 before exposure, 1 of a unit never exposed, 2 at or after t0 in an
// analysed unit (rows 4, 5), of which 1 outside attribution (row 5);
// 1 event of no metric. The reader delivers 8 rows and filters 1 (ts
// 1300 s).
func TestArrowReaderHandTally(t *testing.T) {
	mem := memory.NewCheckedAllocator(memory.NewGoAllocator())
	defer mem.AssertSize(t, 0)
	schema := fields("uid", arrow.PrimitiveTypes.Int64,
		"at", &arrow.TimestampType{Unit: arrow.Second, TimeZone: "Asia/Tokyo"},
		"name", dictOf(arrow.PrimitiveTypes.Int16, arrow.BinaryTypes.LargeString),
		"exp", arrow.BinaryTypes.String,
		"variant", dictOf(arrow.PrimitiveTypes.Uint8, arrow.BinaryTypes.String))
	names := `["exposure", "purchase", "page_view"]`
	in := []arrow.RecordBatch{
		jsonBatch(t, mem, schema, `[101, 102, 103, 101, 102]`, `[1000, 1000, 1100, 2000, 87400]`,
			`[0, 0, 0, 1, 1]|`+names, `["exp1", "exp1", "exp1", null, null]`, `[0, 1, 0, null, null]|["a", "b"]`),
		jsonBatch(t, mem, schema, `[103, 104, 104, 105]`, `[1050, 1200, 1300, 1400]`,
			`[1, 1, 2, 0]|`+names, `[null, null, null, "exp2"]`, `[null, null, null, 0]|["a"]`),
	}
	end := time.Unix(200000, 0)
	spec := experiment.Spec{Key: "exp1", ExposureEvent: "exposure", Control: "a", Arms: []string{"a", "b"}, End: &end,
		Metrics: []experiment.Metric{{Name: "purchase", Events: []string{"purchase"}, Window: 24 * time.Hour}}}
	tl, err := experiment.NewTallier(spec)
	if err != nil {
		t.Fatal(err)
	}
	m := Mapping{User: "uid", TS: "at", Event: "name", Experiment: "exp", Arm: "variant"}
	recs, st, err := readStream(t, schema, in, Options{Mapping: m, ExposureEvent: "exposure", Events: tl.Events(), BatchSize: 3})
	releaseAll(in)
	if err != nil {
		t.Fatal(err)
	}
	if st.RowsRead != 9 || st.Rows != 8 || st.Filtered != 1 || st.FilteredMaxTS != 1300*int64(time.Second) || len(st.BadRows) != 0 {
		t.Errorf("stats %+v", st)
	}
	got := tallyOf(t, spec, recs, st)
	type armCounts struct {
		name                 string
		exposed, units, conv int64
	}
	var arms []armCounts
	for _, a := range got.Arms {
		arms = append(arms, armCounts{a.Name, a.Exposed, a.Units, a.Metrics[0].Conversions})
	}
	if want := []armCounts{{"a", 2, 2, 1}, {"b", 1, 1, 0}}; !slices.Equal(arms, want) {
		t.Errorf("arms %+v, want %+v", arms, want)
	}
	d := got.Diag
	if d.ExposureRows != 3 || d.OtherExperimentRows != 1 || d.MetricEvents != 4 || d.BeforeExposure != 1 ||
		d.UnitNeverExposed != 1 || d.MetricEventsInUnit != 2 || !slices.Equal(d.OutsideAttribution, []int64{1}) ||
		d.NotMetricEvents != 1 || d.UnitsExposed != 3 {
		t.Errorf("diagnostics %+v", d)
	}
}

// BenchmarkArrowReader reads, as Arrow streams, the 200,000-unit log that
// BenchmarkReaderParquet reads from a file (same generator, seed and
// options), in batches of 65,536 rows with ts as timestamp[us, UTC]: text
// columns as plain utf8, or each dictionary-encoded (dictionary<int32,
// utf8>, one dictionary per batch, as query engines commonly send them).
// "tally" is, for scale, what the tally costs on the batches the reader
// delivers (Tallier.Add of every batch, then Tally). Each reports ns/row.
func BenchmarkArrowReader(b *testing.B) {
	cfg := sampledata.DemoConfig()
	cfg.Users, cfg.NeverExposedUsers = 200_000, 200_000/40
	var file bytes.Buffer
	if _, err := sampledata.WriteParquet(&file, cfg, rand.NewPCG(1, 0x61726d74616c6c79)); err != nil {
		b.Fatal(err)
	}
	opts := Options{Mapping: DefaultMapping(), ExposureEvent: "exposure"}
	m := opts.Mapping
	m.Segments = []string{"platform"}
	fr, err := NewReader([]Source{BytesSource("events.parquet", file.Bytes())}, Options{Mapping: m})
	if err != nil {
		b.Fatal(err)
	}
	logical, _, err := drain(b, fr, fr.Record)
	fr.Close()
	defer releaseAll(logical)
	if err != nil {
		b.Fatal(err)
	}
	// open returns a reader of the stream of variant v.
	open := func(b *testing.B, schema *arrow.Schema, in []arrow.RecordBatch) *ArrowReader {
		rr, err := array.NewRecordReader(schema, in)
		if err != nil {
			b.Fatal(err)
		}
		defer rr.Release()
		ar, err := NewArrowReader(rr, "arrow stream", opts)
		if err != nil {
			b.Fatal(err)
		}
		return ar
	}
	read := func(b *testing.B, v streamVariant) {
		schema, in := encodeStream(b, memory.DefaultAllocator, v, logical, 65536)
		defer releaseAll(in)
		var rows int64
		for _, rec := range in {
			rows += rec.NumRows()
		}
		runtime.GC()
		b.ReportAllocs()
		for b.Loop() {
			ar := open(b, schema, in)
			var got int64
			for ar.Next() {
				got += ar.RecordBatch().NumRows()
			}
			if err := ar.Err(); err != nil {
				b.Fatal(err)
			}
			ar.Close()
			if got != rows {
				b.Fatalf("read %d rows of %d", got, rows)
			}
		}
		b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(rows)/float64(b.N), "ns/row")
	}
	s, p := arrow.BinaryTypes.String, arrow.PrimitiveTypes
	tsUS := &arrow.TimestampType{Unit: arrow.Microsecond, TimeZone: "UTC"}
	plain := streamVariant{user: s, text: s, ts: tsUS}
	b.Run("plain", func(b *testing.B) { read(b, plain) })
	b.Run("dictionary", func(b *testing.B) {
		d := dictOf(p.Int32, s)
		read(b, streamVariant{user: d, text: d, ts: tsUS})
	})
	b.Run("tally", func(b *testing.B) {
		schema, in := encodeStream(b, memory.DefaultAllocator, plain, logical, 65536)
		ar := open(b, schema, in)
		releaseAll(in)
		out, st, err := drain(b, ar, ar.RecordBatch)
		ar.Close()
		defer releaseAll(out)
		if err != nil {
			b.Fatal(err)
		}
		spec := demoSpec()
		spec.Segments = nil
		runtime.GC()
		b.ReportAllocs()
		for b.Loop() {
			tallyOf(b, spec, out, st)
		}
		rows := st.Rows
		b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(rows)/float64(b.N), "ns/row")
	})
}

// Options.PlannedArms applies to a stream as to a file: an exposure of a
// planned experiment in an arm not planned is bad (unknown_arm); another
// experiment's exposure is not checked.
func TestArrowReaderPlannedArms(t *testing.T) {
	mem := memory.NewCheckedAllocator(memory.NewGoAllocator())
	defer mem.AssertSize(t, 0)
	s := arrow.BinaryTypes.String
	schema := fields("user_id", s, "ts", &arrow.TimestampType{Unit: arrow.Second}, "event", s,
		"experiment", dictOf(arrow.PrimitiveTypes.Int8, s), "arm", s)
	in := []arrow.RecordBatch{jsonBatch(t, mem, schema, `["u1", "u2", "u3"]`, `[1, 2, 3]`,
		`["exposure", "exposure", "exposure"]`, `[0, 0, 1]|["e1", "e2"]`, `["a", "z", "z"]`)}
	opts := Options{Mapping: DefaultMapping(), ExposureEvent: "exposure", PlannedArms: map[string][]string{"e1": {"a"}}, MaxBadRows: NoLimit}
	recs, st, err := readStream(t, schema, in, opts)
	releaseAll(in)
	if err != nil {
		t.Fatal(err)
	}
	// Row 2 is e1 in arm z, not planned; row 3 is e2, not checked.
	want := []BadRowCount{{Reason: "unknown_arm", Count: 1}}
	if st.Rows != 2 || !slices.Equal(st.BadRows, want) || len(recs) != 1 {
		t.Fatalf("stats %+v, want 2 rows and %v", st, want)
	}
	if got, w := st.BadRowExamples[0].Error(), `arrow stream:2: column "arm": exposure row with an arm that is not planned (value "z")`; got != w {
		t.Errorf("bad row %s, want %s", got, w)
	}
}
