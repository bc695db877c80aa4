package experiment

import (
	"reflect"
	"slices"
	"testing"
	"time"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
	"github.com/apache/arrow-go/v18/arrow/memory"
)

// base is the origin of the hand-made logs' clocks.
var base = time.Date(2026, 5, 4, 0, 0, 0, 0, time.UTC)

// row is one event of a hand-made log; at is an offset from base.
type row struct {
	user  string
	at    time.Duration
	event string
	exp   string // "" is null
	arm   string // "" is null
	// segs holds one value per segment dimension of the batch; nullSeg
	// (or a missing entry) is null.
	segs []string
}

// nullSeg stands for a null segment value in row.segs and unitRow.segs.
const nullSeg = "\x00null"

// batch builds a record batch of the logical event table from rows, with
// one segment column per name in dims.
func batch(t testing.TB, rows []row, dims ...string) arrow.RecordBatch {
	t.Helper()
	fields := []arrow.Field{
		{Name: ColUser, Type: arrow.BinaryTypes.String},
		{Name: ColTS, Type: &arrow.TimestampType{Unit: arrow.Nanosecond, TimeZone: "UTC"}},
		{Name: ColEvent, Type: arrow.BinaryTypes.String},
		{Name: ColExperiment, Type: arrow.BinaryTypes.String, Nullable: true},
		{Name: ColArm, Type: arrow.BinaryTypes.String, Nullable: true},
	}
	for _, d := range dims {
		fields = append(fields, arrow.Field{Name: d, Type: arrow.BinaryTypes.String, Nullable: true})
	}
	b := array.NewRecordBuilder(memory.DefaultAllocator, arrow.NewSchema(fields, nil))
	defer b.Release()
	for _, r := range rows {
		for d := range dims {
			sb := b.Field(5 + d).(*array.StringBuilder)
			if d < len(r.segs) && r.segs[d] != nullSeg {
				sb.Append(r.segs[d])
			} else {
				sb.AppendNull()
			}
		}
		b.Field(0).(*array.StringBuilder).Append(r.user)
		b.Field(1).(*array.TimestampBuilder).Append(arrow.Timestamp(base.Add(r.at).UnixNano()))
		b.Field(2).(*array.StringBuilder).Append(r.event)
		for i, v := range []string{r.exp, r.arm} {
			if v == "" {
				b.Field(3 + i).(*array.StringBuilder).AppendNull()
			} else {
				b.Field(3 + i).(*array.StringBuilder).Append(v)
			}
		}
	}
	return b.NewRecordBatch()
}

// tally runs a Tallier over rows, split into batches of at most size rows
// (size <= 0: one batch).
//
// It also checks that the tally does not depend on the number of hash
// partitions: 1, 2 and 7 partitions must give the same Tally and the same
// unit records.
func tally(t testing.TB, spec Spec, rows []row, size int) Tally {
	t.Helper()
	var first Tally
	var firstUnits []UnitRecord
	for i, parts := range []int{1, 2, 7, -2} {
		// -2: two partitions, with the event, experiment and arm
		// columns dictionary-encoded (dictionaryBatch).
		tl := tallierParts(t, spec, rows, size, parts)
		out, err := tl.Tally()
		if err != nil {
			t.Fatalf("Tally: %v", err)
		}
		seq, err := tl.Units()
		if err != nil {
			t.Fatalf("Units: %v", err)
		}
		units := slices.Collect(seq)
		if i == 0 {
			first, firstUnits = out, units
			continue
		}
		if !reflect.DeepEqual(out, first) {
			t.Fatalf("%d partitions: tally\n%+v\none partition\n%+v", parts, out, first)
		}
		if !reflect.DeepEqual(units, firstUnits) {
			t.Fatalf("%d partitions: unit records\n%+v\none partition\n%+v", parts, units, firstUnits)
		}
	}
	return first
}

// tallier runs a Tallier over rows as tally does and returns it.
func tallier(t testing.TB, spec Spec, rows []row, size int) *Tallier {
	t.Helper()
	return tallierParts(t, spec, rows, size, 3)
}

// dictionaryBatch returns rec with the named utf8 columns dictionary-
// encoded as ingest.Options.DictionaryColumns encodes them (int32 indices),
// and releases rec. Each dictionary lists its values in the reverse order
// of their first row and ends with a value no row uses.
func dictionaryBatch(t testing.TB, rec arrow.RecordBatch, names ...string) arrow.RecordBatch {
	t.Helper()
	defer rec.Release()
	fields := slices.Clone(rec.Schema().Fields())
	cols := slices.Clone(rec.Columns())
	for _, name := range names {
		i := rec.Schema().FieldIndices(name)[0]
		col := rec.Column(i).(*array.String)
		var order []string
		at := map[string]int{}
		for r := 0; r < col.Len(); r++ {
			if v := col.Value(r); col.IsValid(r) && !slices.Contains(order, v) {
				order = append(order, v)
			}
		}
		slices.Reverse(order)
		order = append(order, "\x00unused")
		vb := array.NewStringBuilder(memory.DefaultAllocator)
		for j, v := range order {
			at[v] = j
			vb.Append(v)
		}
		ib := array.NewInt32Builder(memory.DefaultAllocator)
		for r := 0; r < col.Len(); r++ {
			if col.IsNull(r) {
				ib.AppendNull()
			} else {
				ib.Append(int32(at[col.Value(r)]))
			}
		}
		vals, idx := vb.NewArray(), ib.NewArray()
		typ := &arrow.DictionaryType{IndexType: arrow.PrimitiveTypes.Int32, ValueType: arrow.BinaryTypes.String}
		cols[i] = array.NewDictionaryArray(typ, idx, vals)
		vals.Release()
		idx.Release()
		vb.Release()
		ib.Release()
		fields[i].Type = typ
	}
	out := array.NewRecordBatch(arrow.NewSchema(fields, nil), cols, rec.NumRows())
	for _, name := range names {
		cols[rec.Schema().FieldIndices(name)[0]].Release()
	}
	return out
}

// tallierParts is tallier with the given number of hash partitions; a
// negative number is -parts partitions fed dictionaryBatch's batches.
func tallierParts(t testing.TB, spec Spec, rows []row, size, parts int) *Tallier {
	t.Helper()
	dict := parts < 0
	tl, err := newTallier(spec, max(parts, -parts))
	if err != nil {
		t.Fatalf("NewTallier: %v", err)
	}
	if size <= 0 {
		size = len(rows) + 1
	}
	for lo := 0; lo < len(rows); lo += size {
		hi := min(lo+size, len(rows))
		rec := batch(t, rows[lo:hi], spec.Segments...)
		if dict {
			rec = dictionaryBatch(t, rec, ColEvent, ColExperiment, ColArm)
		}
		err := tl.Add(rec)
		rec.Release()
		if err != nil {
			t.Fatalf("Add: %v", err)
		}
	}
	return tl
}

func ptrTime(t time.Time) *time.Time { return &t }

const (
	hour = time.Hour
	day  = 24 * time.Hour
)

// unitBatch builds a record batch of the logical unit table: user, arm,
// ts when timed, one bool column per metric and one utf8 column per
// segment dimension of spec.
func unitBatch(t testing.TB, spec Spec, rows []unitRow, timed bool) arrow.RecordBatch {
	t.Helper()
	fields := []arrow.Field{
		{Name: ColUser, Type: arrow.BinaryTypes.String},
		{Name: ColArm, Type: arrow.BinaryTypes.String},
	}
	if timed {
		fields = append(fields, arrow.Field{Name: ColTS, Type: &arrow.TimestampType{Unit: arrow.Nanosecond, TimeZone: "UTC"}})
	}
	for _, m := range spec.Metrics {
		fields = append(fields, arrow.Field{Name: m.Name, Type: arrow.FixedWidthTypes.Boolean})
	}
	for _, d := range spec.Segments {
		fields = append(fields, arrow.Field{Name: d, Type: arrow.BinaryTypes.String, Nullable: true})
	}
	b := array.NewRecordBuilder(memory.DefaultAllocator, arrow.NewSchema(fields, nil))
	defer b.Release()
	for _, r := range rows {
		i := 0
		next := func() array.Builder { f := b.Field(i); i++; return f }
		str := func(s string) {
			sb := next().(*array.StringBuilder)
			if s == nullSeg {
				sb.AppendNull()
			} else {
				sb.Append(s)
			}
		}
		str(r.user)
		str(r.arm)
		if timed {
			next().(*array.TimestampBuilder).Append(arrow.Timestamp(base.Add(r.at).UnixNano()))
		}
		for m := range spec.Metrics {
			next().(*array.BooleanBuilder).Append(r.flags[m])
		}
		for d := range spec.Segments {
			v := nullSeg
			if d < len(r.segs) {
				v = r.segs[d]
			}
			str(v)
		}
	}
	return b.NewRecordBatch()
}

// countsBatch builds a record batch of the logical counts table; row.seg
// fills the one segment dimension of spec, if any.
func countsBatch(t testing.TB, spec Spec, rows []countRow, immature bool) arrow.RecordBatch {
	t.Helper()
	fields := []arrow.Field{{Name: ColArm, Type: arrow.BinaryTypes.String}}
	for _, d := range spec.Segments {
		fields = append(fields, arrow.Field{Name: d, Type: arrow.BinaryTypes.String, Nullable: true})
	}
	fields = append(fields,
		arrow.Field{Name: ColMetric, Type: arrow.BinaryTypes.String},
		arrow.Field{Name: ColUnits, Type: arrow.PrimitiveTypes.Int64},
		arrow.Field{Name: ColConversions, Type: arrow.PrimitiveTypes.Int64})
	if immature {
		fields = append(fields, arrow.Field{Name: ColImmature, Type: arrow.PrimitiveTypes.Int64})
	}
	b := array.NewRecordBuilder(memory.DefaultAllocator, arrow.NewSchema(fields, nil))
	defer b.Release()
	for _, r := range rows {
		i := 0
		next := func() array.Builder { f := b.Field(i); i++; return f }
		next().(*array.StringBuilder).Append(r.arm)
		for range spec.Segments {
			sb := next().(*array.StringBuilder)
			if r.seg == nullSeg {
				sb.AppendNull()
			} else {
				sb.Append(r.seg)
			}
		}
		next().(*array.StringBuilder).Append(r.metric)
		next().(*array.Int64Builder).Append(r.units)
		next().(*array.Int64Builder).Append(r.conversions)
		if immature {
			next().(*array.Int64Builder).Append(r.immature)
		}
	}
	return b.NewRecordBatch()
}
