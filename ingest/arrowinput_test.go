package ingest

import (
	"bytes"
	"encoding/csv"
	"fmt"
	"math/rand/v2"
	"reflect"
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

// streamCell is one cell of a logical batch as text: a timestamp as RFC
// 3339 UTC, a null as ∅.
func streamCell(col arrow.Array, i int) string {
	if col.IsNull(i) {
		return "∅"
	}
	switch c := col.(type) {
	case *array.String:
		return c.Value(i)
	case *array.Timestamp:
		return time.Unix(0, int64(c.Value(i))).UTC().Format(time.RFC3339Nano)
	}
	panic(fmt.Sprintf("unexpected column type %v", col.DataType()))
}

// streamRows returns each batch's rows as text, the cells joined by " | ".
func streamRows(recs []arrow.RecordBatch) [][]string {
	var out [][]string
	for _, rec := range recs {
		var rows []string
		for i := 0; i < int(rec.NumRows()); i++ {
			var cells []string
			for _, col := range rec.Columns() {
				cells = append(cells, streamCell(col, i))
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
func drain(t *testing.T, r batchReader, get func() arrow.RecordBatch) ([]arrow.RecordBatch, Stats, error) {
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
func (e *encoder) textArray(t *testing.T, col string, typ arrow.DataType, vals []*string) arrow.Array {
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
func (e *encoder) dictArray(t *testing.T, col string, dt *arrow.DictionaryType, vals []*string) arrow.Array {
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
func (e *encoder) tsArray(t *testing.T, typ arrow.DataType, ns []int64, unitNanos int64) arrow.Array {
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
func encodeStream(t *testing.T, mem memory.Allocator, v streamVariant, logical []arrow.RecordBatch, inRows int) (*arrow.Schema, []arrow.RecordBatch) {
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
func tallyOf(t *testing.T, spec experiment.Spec, recs []arrow.RecordBatch, st Stats) experiment.Tally {
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
