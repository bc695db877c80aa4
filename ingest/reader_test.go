package ingest

import (
	"fmt"
	"strings"
	"testing"
	"time"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
	"github.com/apache/arrow-go/v18/arrow/memory"
)

// readAll reads every batch and returns the rows as text, one line per row:
// the columns in schema order separated by " | ", a timestamp as RFC 3339
// UTC, a null as ∅. It checks the schema of every batch, and that every
// Arrow buffer has been released once the reader is closed.
func readAll(t *testing.T, sources []Source, opts Options) ([]string, Stats, error) {
	t.Helper()
	mem := memory.NewCheckedAllocator(memory.NewGoAllocator())
	defer mem.AssertSize(t, 0)
	opts.Allocator = mem
	r, err := NewReader(sources, opts)
	if err != nil {
		t.Fatalf("NewReader: %v", err)
	}
	defer r.Close()
	var rows []string
	for r.Next() {
		rec := r.RecordBatch()
		if !rec.Schema().Equal(r.Schema()) {
			t.Fatalf("batch schema %v, want %v", rec.Schema(), r.Schema())
		}
		for _, col := range rec.Columns() {
			checkDictionary(t, col)
		}
		for i := 0; i < int(rec.NumRows()); i++ {
			var cells []string
			for _, col := range rec.Columns() {
				cells = append(cells, cellText(col, i))
			}
			rows = append(rows, strings.Join(cells, " | "))
		}
	}
	return rows, r.Stats(), r.Err()
}

func cellText(col arrow.Array, i int) string {
	if col.IsNull(i) {
		return "∅"
	}
	switch c := col.(type) {
	case *array.String:
		return c.Value(i)
	case *array.Dictionary:
		return c.Dictionary().(*array.String).Value(c.GetValueIndex(i))
	case *array.Timestamp:
		return time.Unix(0, int64(c.Value(i))).UTC().Format(time.RFC3339Nano)
	}
	panic(fmt.Sprintf("unexpected column type %v", col.DataType()))
}

// checkDictionary fails unless a dictionary-encoded column (see
// Options.DictionaryColumns) is well formed: int32 indices, each valid row's
// within the dictionary and each null row's 0, and a dictionary of
// distinct, non-null utf8 values.
func checkDictionary(t *testing.T, col arrow.Array) {
	t.Helper()
	d, ok := col.(*array.Dictionary)
	if !ok {
		return
	}
	if !arrow.TypeEqual(d.DataType(), dictionaryType) {
		t.Fatalf("dictionary column of type %v", d.DataType())
	}
	vals := d.Dictionary().(*array.String)
	seen := map[string]bool{}
	for j := 0; j < vals.Len(); j++ {
		if vals.IsNull(j) || seen[vals.Value(j)] {
			t.Fatalf("dictionary value %d null or repeated: %q", j, vals.Value(j))
		}
		seen[vals.Value(j)] = true
	}
	for i, x := range d.Indices().(*array.Int32).Int32Values() {
		if d.IsValid(i) && (x < 0 || int(x) >= vals.Len()) || d.IsNull(i) && x != 0 {
			t.Fatalf("row %d: index %d of a dictionary of %d values (valid %v)", i, x, vals.Len(), d.IsValid(i))
		}
	}
}

func equalRows(t *testing.T, got, want []string) {
	t.Helper()
	if len(got) != len(want) {
		t.Errorf("got %d rows, want %d", len(got), len(want))
	}
	for i := 0; i < len(got) || i < len(want); i++ {
		var g, w string
		if i < len(got) {
			g = got[i]
		}
		if i < len(want) {
			w = want[i]
		}
		if g != w {
			t.Errorf("row %d:\n got %s\nwant %s", i+1, g, w)
		}
	}
}

func TestSchema(t *testing.T) {
	m := DefaultMapping()
	m.Segments = []string{"country", "platform"}
	r, err := NewReader(nil, Options{Mapping: m})
	if err != nil {
		t.Fatal(err)
	}
	// The logical table of package experiment (events.go).
	want := "schema:\n  fields: 7\n" +
		"    - user: type=utf8\n" +
		"    - ts: type=timestamp[ns, tz=UTC]\n" +
		"    - event: type=utf8\n" +
		"    - experiment: type=utf8, nullable\n" +
		"    - arm: type=utf8, nullable\n" +
		"    - country: type=utf8, nullable\n" +
		"    - platform: type=utf8, nullable"
	if got := r.Schema().String(); got != want {
		t.Errorf("schema:\n%s\nwant:\n%s", got, want)
	}
	if r.Next() || r.Err() != nil {
		t.Errorf("reader without sources: Next true or Err %v", r.Err())
	}
}

func TestNewReaderOptionErrors(t *testing.T) {
	noArm := DefaultMapping()
	noArm.Arm = ""
	clash := DefaultMapping()
	clash.Segments = []string{"arm"}
	noUser := DefaultMapping()
	noUser.User = ""
	badUnit := DefaultMapping()
	badUnit.EpochUnit = "minutes"
	tests := []struct {
		name    string
		sources []Source
		opts    Options
		want    string
	}{
		{"exposure without arm column", nil, Options{Mapping: noArm, ExposureEvent: "exposure"},
			`column mapping: exposure event "exposure" needs an arm column`},
		{"segment clashes", nil, Options{Mapping: clash},
			`column mapping: segment column "arm" clashes with another column of the event table`},
		{"no user", nil, Options{Mapping: noUser}, "column mapping: no column named for user"},
		{"epoch unit", nil, Options{Mapping: badUnit}, `epoch unit "minutes": want s, ms, us or ns`},
		{"batch size", nil, Options{Mapping: DefaultMapping(), BatchSize: -1}, "batch size -1: must be positive"},
		{"extension", []Source{BytesSource("events.json", nil)}, Options{Mapping: DefaultMapping()},
			"events.json: unknown file type (want .csv, .csv.gz, .parquet or .parq)"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := NewReader(tc.sources, tc.opts)
			if err == nil || err.Error() != tc.want {
				t.Errorf("NewReader error %v, want %q", err, tc.want)
			}
		})
	}
}
