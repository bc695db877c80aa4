package ingest

import (
	"bytes"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/parquet-go/parquet-go"
)

// parquetTesting returns the folder of Parquet files written by other
// engines: testdata/parquet-testing/upstream, a copy of part of the Apache
// parquet-testing repository (see NOTICE.md there). The folder is part of
// the repository, so a missing one fails the test instead of skipping it.
func parquetTesting(t *testing.T) string {
	t.Helper()
	dir := filepath.Join("testdata", "parquet-testing", "upstream")
	for _, sub := range []string{"data", "bad_data"} {
		if _, err := os.Stat(filepath.Join(dir, sub)); err != nil {
			t.Fatalf("parquet-testing files missing from the repository: %v", err)
		}
	}
	return dir
}

func fileSource(t *testing.T, path string) []Source {
	t.Helper()
	srcs, err := FileSources([]string{path})
	if err != nil {
		t.Fatal(err)
	}
	return srcs
}

// alltypes_plain.parquet (Impala): id INT32, string_col BYTE_ARRAY,
// date_string_col BYTE_ARRAY, timestamp_col INT96.
func TestParquetAlltypesPlain(t *testing.T) {
	dir := parquetTesting(t)
	m := Mapping{User: "id", TS: "timestamp_col", Event: "string_col", Segments: []string{"date_string_col"}}
	rows, st, err := readAll(t, fileSource(t, filepath.Join(dir, "data", "alltypes_plain.parquet")), Options{Mapping: m, BatchSize: 3})
	if err != nil {
		t.Fatal(err)
	}
	// The table in the doc comment of aloneguid/parquet-dotnet:
	// src/Parquet.Test/ParquetReaderOnTestFilesTest.cs (string columns
	// shown there as hex bytes: [30 33 2F 30 31 2F 30 39] is "03/01/09").
	equalRows(t, rows, []string{
		"4 | 2009-03-01T00:00:00Z | 0 | 03/01/09",
		"5 | 2009-03-01T00:01:00Z | 1 | 03/01/09",
		"6 | 2009-04-01T00:00:00Z | 0 | 04/01/09",
		"7 | 2009-04-01T00:01:00Z | 1 | 04/01/09",
		"2 | 2009-02-01T00:00:00Z | 0 | 02/01/09",
		"3 | 2009-02-01T00:01:00Z | 1 | 02/01/09",
		"0 | 2009-01-01T00:00:00Z | 0 | 01/01/09",
		"1 | 2009-01-01T00:01:00Z | 1 | 01/01/09",
	})
	if st.Files != 1 || st.RowsRead != 8 || st.Rows != 8 {
		t.Errorf("stats %+v, want 1 file, 8 rows", st)
	}
}

// alltypes_dictionary.parquet: the same columns, dictionary encoded.
func TestParquetAlltypesDictionary(t *testing.T) {
	dir := parquetTesting(t)
	m := Mapping{User: "id", TS: "timestamp_col", Event: "string_col", Segments: []string{"date_string_col"}}
	rows, _, err := readAll(t, fileSource(t, filepath.Join(dir, "data", "alltypes_dictionary.parquet")), Options{Mapping: m})
	if err != nil {
		t.Fatal(err)
	}
	// From memory, not cross-checked with another reader: the file holds
	// the rows of ids 0 and 1 of alltypes_plain (parquet-dotnet's table
	// above).
	equalRows(t, rows, []string{
		"0 | 2009-01-01T00:00:00Z | 0 | 01/01/09",
		"1 | 2009-01-01T00:01:00Z | 1 | 01/01/09",
	})
}

// int96_from_spark.parquet: one optional INT96 column "a" of 6 values.
func TestParquetInt96FromSpark(t *testing.T) {
	dir := parquetTesting(t)
	path := filepath.Join(dir, "data", "int96_from_spark.parquet")
	// int96_from_spark.md gives the values as microseconds since the epoch:
	// 1704141296123456, 1704070800000000, 253402225200000000,
	// 1735599600000000, null, 9089380393200000000. The third and sixth
	// (years 9999 and 290000) do not fit in int64 nanoseconds.
	want := []struct {
		ns  int64
		err error
		raw string
	}{
		{ns: 1704141296123456 * 1000},
		{ns: 1704070800000000 * 1000},
		// 253402225200 s: date -u -d @253402225200 = 9999-12-31 03:00:00 UTC
		{err: ErrTimestampRange, raw: "9999-12-31T03:00:00Z"},
		{ns: 1735599600000000 * 1000},
		{err: ErrNullTimestamp},
		// 290000-12-31T01:00:00+02:00 in the .md's Spark code. The stored
		// bytes (measured: 0060b9c76ee2ffffa8abb0f9) hold Julian day
		// -105796696 and a negative time of day, so Spark wrapped the value
		// when writing it; what they decode to is far out of range too.
		{err: ErrTimestampRange, raw: "-294554-12-13T14:58:10.448384Z"},
	}
	got := readTimestampColumn(t, path, "a")
	if len(got) != len(want) {
		t.Fatalf("%d values, want %d", len(got), len(want))
	}
	for i, w := range want {
		g := got[i]
		if g.err != w.err || (w.err == nil && g.ns != w.ns) || g.raw != w.raw {
			t.Errorf("row %d: got %d, %v, %q; want %d, %v, %q", i+1, g.ns, g.err, g.raw, w.ns, w.err, w.raw)
		}
	}

	// The file has no other column, so the Reader cannot use it alone:
	// INT96 cannot be a user id.
	_, _, err := readAll(t, fileSource(t, path), Options{Mapping: Mapping{User: "a", TS: "a", Event: "a"}})
	var ce *ColumnError
	if !errors.As(err, &ce) || !errors.Is(err, ErrColumnType) || ce.Column != "a" {
		t.Errorf("INT96 as user id: error %v, want *ColumnError with ErrColumnType for column a", err)
	}
}

type tsValue struct {
	ns   int64
	err  error
	raw  string
	null bool
}

// readTimestampColumn decodes every value of one column with the reader's
// own page loop and timestamp conversion, without stopping at bad values.
func readTimestampColumn(t *testing.T, path, name string) []tsValue {
	return readColumn(t, path, name, true)
}

// readColumn decodes every value of one column with the reader's page loop,
// as a timestamp or as text.
func readColumn(t *testing.T, path, name string, isTS bool) []tsValue {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	pf, err := parquet.OpenFile(bytes.NewReader(data), int64(len(data)))
	if err != nil {
		t.Fatal(err)
	}
	leaf, ok := lookupLeaf(pf.Schema(), name)
	if !ok {
		t.Fatalf("no column %q", name)
	}
	c := &pqColumn{name: name, buf: make([]parquet.Value, 4)}
	var detail string
	if isTS {
		c.ts, detail = newTSDecoder(leaf.Node.Type(), 0)
	} else {
		c.kind, detail = textKind(leaf.Node.Type())
	}
	if detail != "" {
		t.Fatal(detail)
	}
	var out []tsValue
	for _, rg := range pf.RowGroups() {
		c.pages = rg.ColumnChunks()[leaf.ColumnIndex].Pages()
		for {
			v, err := c.next()
			if err == errColumnShort {
				break
			}
			if err != nil {
				t.Fatal(err)
			}
			if !isTS {
				cl := c.text(v)
				out = append(out, tsValue{raw: strings.Clone(cl.s), null: cl.null})
				continue
			}
			ns, raw, err := c.ts.decode(v)
			out = append(out, tsValue{ns: ns, err: err, raw: raw.s})
		}
		c.closePages()
	}
	return out
}

// nulls.snappy.parquet: an optional group b_struct with one INT32 field
// b_c_int; from memory, all 8 rows are null.
func TestParquetNulls(t *testing.T) {
	dir := parquetTesting(t)
	path := filepath.Join(dir, "data", "nulls.snappy.parquet")
	m := Mapping{User: "b_struct.b_c_int", TS: "b_struct.b_c_int", Event: "b_struct.b_c_int", EpochUnit: "s"}
	_, st, err := readAll(t, fileSource(t, path), Options{Mapping: m})
	var re *RowError
	if !errors.As(err, &re) || !errors.Is(err, ErrNullUser) {
		t.Fatalf("error %v, want a *RowError for a null user", err)
	}
	want := path + `:1: row group 0: column "b_struct.b_c_int": null or empty user id`
	if err.Error() != want || re.Row != 1 || re.RowGroup != 0 || st.RowsRead != 1 {
		t.Errorf("error %q (row %d, row group %d, %d rows read), want %q", err, re.Row, re.RowGroup, st.RowsRead, want)
	}
	vals := readColumn(t, path, "b_struct.b_c_int", false)
	if len(vals) != 8 {
		t.Errorf("%d values, want 8", len(vals))
	}
	for i, v := range vals {
		if !v.null {
			t.Errorf("row %d: %q, want null", i+1, v.raw)
		}
	}
	// The group itself is not a column.
	_, _, err = readAll(t, fileSource(t, path), Options{Mapping: Mapping{User: "b_struct", TS: "b_struct", Event: "b_struct"}})
	if !errors.Is(err, ErrColumnType) || !strings.Contains(err.Error(), `name one of its fields as b_struct.field`) {
		t.Errorf("group as a column: error %v, want ErrColumnType naming the dotted form", err)
	}
}
