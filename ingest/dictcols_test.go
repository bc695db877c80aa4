package ingest

import (
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
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

// CSV rows have no dictionary: each value is placed by its text. The rows,
// counts and errors are those of the reader without the option, on every
// CSV test file, sequential and parallel.
func TestDictionaryColumnsCSV(t *testing.T) {
	for _, path := range csvTestFiles {
		data, err := os.ReadFile(filepath.FromSlash(path))
		if err != nil {
			t.Fatal(err)
		}
		for i, m := range csvMappings(data) {
			for _, budget := range []int64{0, NoLimit} {
				t.Run(fmt.Sprintf("%s/%d/%d", filepath.Base(path), i, budget), func(t *testing.T) {
					read := outcomeOf(t, filepath.Base(path), data)
					for _, rowByRow := range []bool{true, false} {
						o := Options{Mapping: m, MaxBadRows: budget, BatchSize: 5, Workers: 3, rowByRow: rowByRow}
						want := read(o)
						o.DictionaryColumns = true
						if got := read(o); !reflect.DeepEqual(got, want) {
							t.Fatalf("row by row %v:\n got %+v\nwant %+v", rowByRow, got, want)
						}
					}
				})
			}
		}
	}
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
