package ingest

import (
	"bytes"
	"errors"
	"fmt"
	"hash/crc32"
	"math/rand/v2"
	"reflect"
	"strings"
	"testing"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
	"github.com/apache/arrow-go/v18/arrow/memory"
	"github.com/parquet-go/parquet-go"
)

// With DictionaryColumns the event, experiment and arm columns are
// dictionary-encoded and the others keep their types; without, every text
// column is utf8.
func TestDictionaryColumnsSchema(t *testing.T) {
	m := DefaultMapping()
	m.Segments = []string{"country"}
	for _, dict := range []bool{false, true} {
		p, err := newPlan(Options{Mapping: m, DictionaryColumns: dict})
		if err != nil {
			t.Fatal(err)
		}
		want := map[string]arrow.DataType{
			"user_id": arrow.BinaryTypes.String, "event": arrow.BinaryTypes.String,
			"experiment": arrow.BinaryTypes.String, "arm": arrow.BinaryTypes.String, "country": arrow.BinaryTypes.String,
		}
		if dict {
			for _, n := range []string{"event", "experiment", "arm"} {
				want[n] = &arrow.DictionaryType{IndexType: arrow.PrimitiveTypes.Int32, ValueType: arrow.BinaryTypes.String}
			}
		}
		for _, f := range p.schema.Fields() {
			if w, ok := want[f.Name]; ok && !arrow.TypeEqual(f.Type, w) {
				t.Errorf("dictionary %v: column %s is %v, want %v", dict, f.Name, f.Type, w)
			}
		}
	}
}

// The Parquet bulk path really takes the indices of the file's dictionary
// pages: a batch of a dictionary-encoded file has dictionary columns whose
// values came with codes (places set), and the rows are those of the
// reader without the option (TestBulkPathMatchesRowByRow checks all of
// them).
func TestDictionaryColumnsFromParquetDictionaries(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 9))
	data := writeParquet(t, randomBulkRows(rng, 2000), parquet.MaxRowsPerRowGroup(500))
	src := []Source{BytesSource("d.parquet", data)}
	m := DefaultMapping()
	opts := Options{Mapping: m, MaxBadRows: NoLimit, Workers: 1}
	o, err := src[0].open()
	if err != nil {
		t.Fatal(err)
	}
	defer o.Close()
	pr, err := newParquetReader(src[0], o, mustPlan(t, Options{Mapping: m, DictionaryColumns: true}))
	if err != nil {
		t.Fatal(err)
	}
	pr.mem = memory.NewGoAllocator()
	w := pr.newWorker(true, nil)
	defer w.close()
	res := w.run(0)
	if res.err != nil {
		t.Fatal(res.err)
	}
	if len(res.recs) == 0 {
		t.Fatal("no batch")
	}
	coded := 0
	for _, c := range w.bld.str {
		if c != nil && c.dict {
			coded += len(c.places)
		}
	}
	for _, rec := range res.recs {
		if _, ok := rec.Column(colEvent).(*array.Dictionary); !ok {
			t.Errorf("event column is %T", rec.Column(colEvent))
		}
		rec.Release()
	}
	if coded == 0 {
		t.Error("no value came with a code from the file's dictionary")
	}
	want, wantSt, wantErr := readAll(t, src, opts)
	opts.DictionaryColumns = true
	got, gotSt, gotErr := readAll(t, src, opts)
	if !reflect.DeepEqual(got, want) || fmt.Sprint(gotSt, gotErr) != fmt.Sprint(wantSt, wantErr) {
		t.Fatalf("rows, stats or error differ with dictionary columns: %v %v / %v %v", gotSt, gotErr, wantSt, wantErr)
	}
}

func mustPlan(t *testing.T, o Options) *plan {
	t.Helper()
	p, err := newPlan(o)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// The builder's dictionary columns: values with codes, the same values
// without (a plain page), empty experiment and arm cells as nulls, and a
// second batch that starts its dictionary afresh.
func TestBuilderDictionaryColumns(t *testing.T) {
	p := mustPlan(t, Options{Mapping: DefaultMapping(), DictionaryColumns: true})
	mem := memory.NewCheckedAllocator(memory.NewGoAllocator())
	defer mem.AssertSize(t, 0)
	b := newBatchBuilder(mem, p)
	defer b.release()
	type in struct {
		event, exp, arm string
		eventCode       int32
	}
	batches := [][]in{
		{{"view", "", "", 3}, {"exposure", "exp-a", "control", 1}, {"view", "exp-a", "", 0}, {"exposure", "exp-a", "treatment", 1},
			{"view", "exp-b", "", 3}, {"purchase", "", "", 0}, {"purchase", "", "", 9}},
		{{"purchase", "", "", 9}, {"view", "exp-b", "", 0}},
	}
	for bi, rows := range batches {
		for _, r := range rows {
			cells := make([]cell, len(p.logical))
			cells[colUser] = cell{s: "u1"}
			cells[colEvent] = cell{s: r.event, code: r.eventCode}
			cells[p.expCol] = cell{s: r.exp}
			cells[p.armCol] = cell{s: r.arm}
			b.append(&row{cells: cells})
		}
		rec := b.newRecord()
		for _, col := range rec.Columns() {
			checkDictionary(t, col)
		}
		for i, r := range rows {
			for c, want := range map[int]string{colEvent: r.event, p.expCol: r.exp, p.armCol: r.arm} {
				got := "∅"
				if d := rec.Column(c).(*array.Dictionary); d.IsValid(i) {
					got = d.Dictionary().(*array.String).Value(d.GetValueIndex(i))
				} else if c == colEvent {
					t.Fatalf("batch %d row %d: null event", bi, i)
				}
				if want == "" {
					want = "∅"
				}
				if got != want {
					t.Errorf("batch %d row %d column %d: %q, want %q", bi, i, c, got, want)
				}
			}
		}
		if n := rec.Column(colEvent).(*array.Dictionary).Dictionary().Len(); n != map[int]int{0: 3, 1: 2}[bi] {
			t.Errorf("batch %d: %d event values, want %d", bi, n, map[int]int{0: 3, 1: 2}[bi])
		}
		rec.Release()
	}
}

// An interner gives the same text the same code, and no code past
// maxCodes texts.
func TestInternerLimit(t *testing.T) {
	n := newInterner()
	if a, b := n.code("x"), n.code(strings.Clone("x")); a != 1 || b != 1 {
		t.Fatalf("codes %d, %d; want 1, 1", a, b)
	}
	for i := 1; i < maxCodes; i++ {
		if c := n.code(fmt.Sprint(i)); c != int32(i+1) {
			t.Fatalf("text %d: code %d", i, c)
		}
	}
	if c := n.code("one too many"); c != 0 {
		t.Fatalf("code %d past the limit", c)
	}
	if c := n.code("x"); c != 1 {
		t.Fatalf("a known text after the limit: code %d", c)
	}
}

// A dictionary index outside its dictionary, in a column after the user
// column on rows the reader does not need (their event is filtered out),
// still stops the bulk path with an error that names the index and the
// dictionary's size, with and without dictionary columns; the file is written here and the
// experiment column's eight indices (one bit-packed run of width 2 at the
// end of its only data page, an uncompressed one) overwritten with 3, one
// past its three values, and the page's checksum mended.
func TestBadDictionaryIndexOnSkippedRows(t *testing.T) {
	type rec struct {
		User  string `parquet:"user_id"`
		TS    int64  `parquet:"ts,timestamp(millisecond)"`
		Event string `parquet:"event,dict"`
		Exp   string `parquet:"experiment,dict"`
	}
	var rows []rec
	for i := range 8 {
		rows = append(rows, rec{User: fmt.Sprint("u", i), TS: 1_780_000_000_000 + int64(i), Event: "view", Exp: []string{"x", "y", "z"}[i%3]})
	}
	data := writeParquet(t, rows, parquet.Compression(&parquet.Uncompressed))
	pf, err := parquet.OpenFile(bytes.NewReader(data), int64(len(data)))
	if err != nil {
		t.Fatal(err)
	}
	md := pf.Metadata().RowGroups[0].Columns[3].MetaData
	end := chunkStart(&md) + md.TotalCompressedSize
	bad := bytes.Clone(data)
	if bad[end-4] != 2 || bad[end-3] != 3 {
		t.Fatalf("the page does not end with one bit-packed run of width 2: % x", bad[end-4:end])
	}
	bad[end-2], bad[end-1] = 0xff, 0xff
	fixPageChecksum(t, data, bad, md.DataPageOffset, end)
	m := Mapping{User: "user_id", TS: "ts", Event: "event", Experiment: "experiment"}
	src := []Source{BytesSource("bad.parquet", bad)}
	for _, o := range []Options{
		{Mapping: m, Events: []string{"purchase"}},
		{Mapping: m, Events: []string{"purchase"}, DictionaryColumns: true},
		{Mapping: m},
	} {
		_, _, err := readAll(t, src, o)
		if err == nil || !strings.Contains(err.Error(), `column "experiment": corrupt parquet file: dictionary index 3 of a dictionary of 3 values`) ||
			!strings.HasPrefix(err.Error(), "bad.parquet: row group 0") {
			t.Errorf("options %+v: error %v", o, err)
		}
	}
	// Row by row, parquet-go itself fails on the index (it panics, and
	// the reader recovers).
	if _, _, err := readAll(t, src, Options{Mapping: m, Events: []string{"purchase"}, rowByRow: true}); !errors.Is(err, errPanicked) ||
		!strings.HasPrefix(err.Error(), "bad.parquet") {
		t.Errorf("row by row: error %v", err)
	}
	// The file as written reads without an error.
	if _, _, err := readAll(t, []Source{BytesSource("good.parquet", data)}, Options{Mapping: m, Events: []string{"purchase"}}); err != nil {
		t.Fatal(err)
	}
}

// fixPageChecksum mends the CRC in the header of the data page that runs
// from start to end in bad (a copy of data with bytes of the page's data
// overwritten). The header is Thrift compact: the CRC is a zigzag varint
// of the CRC-32 of the page's data, found in the header by its old value
// (which tells where the data starts); the new one must encode to as many
// bytes.
func fixPageChecksum(t *testing.T, data, bad []byte, start, end int64) {
	t.Helper()
	varint := func(c uint32) []byte {
		z := uint32(int32(c)<<1) ^ uint32(int32(c)>>31)
		var b []byte
		for z >= 0x80 {
			b = append(b, byte(z)|0x80)
			z >>= 7
		}
		return append(b, byte(z))
	}
	for s := end - 1; s > start; s-- {
		old := varint(crc32.ChecksumIEEE(data[s:end]))
		at := bytes.Index(data[start:s], old)
		if at < 0 {
			continue
		}
		repl := varint(crc32.ChecksumIEEE(bad[s:end]))
		if len(repl) != len(old) {
			t.Fatalf("the new checksum takes %d bytes, the old %d", len(repl), len(old))
		}
		copy(bad[start+int64(at):], repl)
		return
	}
	t.Fatal("no page checksum found")
}
