package ingest

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"errors"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/apache/arrow-go/v18/arrow/array"
	"github.com/apache/arrow-go/v18/arrow/memory"
	"github.com/parquet-go/parquet-go"
)

// The tests in this file read the files of testdata/parquet-testing/upstream
// (copied from the Apache parquet-testing repository, see NOTICE.md there),
// which other programs wrote (Spark, Impala, parquet-mr, Arrow C++,
// arrow-rs, Polars). The expected values come from outside armtally: the
// upstream descriptions beside the files (delta_*_expect.csv,
// int96_from_spark.md) and, for the other files,
// testdata/parquet-testing/expect.json, the values as DuckDB reads them
// (written by testdata/parquet-testing/expect.mjs).

// readTimeout bounds every read of a file from elsewhere: a hang is a bug.
const readTimeout = 20 * time.Second

// within runs f and fails the test if it does not return in time.
func within(t *testing.T, what string, f func()) {
	t.Helper()
	done := make(chan struct{})
	go func() {
		defer close(done)
		f()
	}()
	select {
	case <-done:
	case <-time.After(readTimeout):
		t.Fatalf("%s: no answer after %v (a hang)", what, readTimeout)
	}
}

// Partition keys that supply the logical columns a test does not take from
// the file. No file of parquet-testing has columns of these names.
const (
	keyUser  = "armtally_test_user"
	keyTS    = "armtally_test_ts"
	keyEvent = "armtally_test_event"
)

// columnRead is what the Reader made of one column of a file.
type columnRead struct {
	text  []string // as a segment: one per row, "∅" for null
	ts    []int64  // as ts: one per non-null row
	nulls int64    // as ts: null timestamps
	st    Stats
	err   error
}

// isTimestampColumn reports whether armtally reads a column only as a ts
// (TIMESTAMP, DATE, INT96) and not as text.
func isTimestampColumn(typ parquet.Type) bool {
	_, textErr := textKind(typ)
	_, tsErr := newTSDecoder(typ, 0)
	return textErr != "" && tsErr == ""
}

// readParquetColumn reads the column at path of the Parquet data through a
// Reader: as the ts column when asTS, as a segment otherwise, with the
// other logical columns supplied by partition values and every bad row
// skipped and counted.
func readParquetColumn(t *testing.T, name string, data []byte, path string, asTS bool) columnRead {
	t.Helper()
	src := BytesSource(name, data)
	src.Partitions = []Partition{{Key: keyUser, Value: "u"}, {Key: keyTS, Value: "2026-01-01"}, {Key: keyEvent, Value: "e"}}
	m := Mapping{User: keyUser, TS: keyTS, Event: keyEvent}
	if asTS {
		m.TS = path
	} else {
		m.Segments = []string{path}
	}
	mem := memory.NewCheckedAllocator(memory.NewGoAllocator())
	defer mem.AssertSize(t, 0)
	var out columnRead
	within(t, name+" column "+path, func() {
		r, err := NewReader([]Source{src}, Options{Mapping: m, MaxBadRows: NoLimit, Allocator: mem, BatchSize: 100})
		if err != nil {
			out.err = err
			return
		}
		defer r.Close()
		for r.Next() {
			rec := r.RecordBatch()
			if asTS {
				ts := rec.Column(colTS).(*array.Timestamp)
				for i := 0; i < ts.Len(); i++ {
					out.ts = append(out.ts, int64(ts.Value(i)))
				}
				continue
			}
			seg := rec.Column(3)
			for i := 0; i < seg.Len(); i++ {
				out.text = append(out.text, cellText(seg, i))
			}
		}
		out.err, out.st = r.Err(), r.Stats()
		for _, rc := range out.st.BadRows {
			if rc.Reason == ReasonNullTimestamp {
				out.nulls = rc.Count
			}
		}
	})
	return out
}

type expectColumn struct {
	Path   string
	Type   string    // DuckDB's type
	Values []*string // nil: a type armtally does not read
}

type expectFile struct {
	Rows    int64
	Error   string // DuckDB could not read the file
	Columns []expectColumn
}

func loadExpect(t *testing.T) map[string]expectFile {
	t.Helper()
	data, err := os.ReadFile(filepath.Join("testdata", "parquet-testing", "expect.json"))
	if err != nil {
		t.Fatal(err)
	}
	var e struct {
		Reader string
		Files  map[string]expectFile
	}
	if err := json.Unmarshal(data, &e); err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(e.Reader, "DuckDB ") {
		t.Fatalf("expect.json: reader %q", e.Reader)
	}
	return e.Files
}

// Every file of data/ opens, lists its schema, and every column reads back
// DuckDB's values (expect.json) when armtally maps its type, or is refused
// with ErrColumnType when it does not (floating point, decimals, repeated
// columns). Codecs covered: none, snappy, gzip (concatenated members), zstd,
// LZ4 raw, Hadoop LZ4 (whose values come from Arrow C++'s test instead:
// hadoopLZ4Expect); page formats v1 and v2; encodings plain, dictionary,
// RLE, delta binary packed, delta byte array, byte stream split.
func TestParquetTestingData(t *testing.T) {
	dir := parquetTesting(t)
	expect := loadExpect(t)
	files, err := filepath.Glob(filepath.Join(dir, "data", "*.parquet"))
	if err != nil {
		t.Fatal(err)
	}
	corrupt := map[string]bool{"datapage_v1-corrupt-checksum.parquet": true, "nation.dict-malformed.parquet": true}
	for _, path := range files {
		name := filepath.Base(path)
		if corrupt[name] {
			continue // TestParquetTestingBad
		}
		t.Run(name, func(t *testing.T) {
			data, err := os.ReadFile(path)
			if err != nil {
				t.Fatal(err)
			}
			pf, err := parquet.OpenFile(bytes.NewReader(data), int64(len(data)))
			if err != nil {
				t.Fatalf("open: %v", err)
			}
			if s := pf.Schema().String(); !strings.HasPrefix(s, "message ") {
				t.Errorf("schema listing %q", s)
			}
			want, ok := expect[name]
			switch {
			case name == "int96_from_spark.parquet":
				return // TestParquetInt96FromSpark, from the .md
			case name == "hadoop_lz4_compressed.parquet":
				want = hadoopLZ4Expect(t, expect)
			case !ok || want.Error != "":
				t.Fatalf("expect.json has no values for %s (%q): run expect.mjs", name, want.Error)
			}
			if pf.NumRows() != want.Rows {
				t.Errorf("%d rows, DuckDB %d", pf.NumRows(), want.Rows)
			}
			byPath := map[string]expectColumn{}
			for _, c := range want.Columns {
				byPath[c.Path] = c
			}
			for _, col := range pf.Schema().Columns() {
				p := strings.Join(col, ".")
				leaf, _ := lookupLeaf(pf.Schema(), p)
				asTS := isTimestampColumn(leaf.Node.Type())
				got := readParquetColumn(t, name, data, p, asTS)
				c, ok := byPath[p]
				if !ok { // inside a repeated group: DuckDB lists no values
					if !errors.Is(got.err, ErrColumnType) || leaf.MaxRepetitionLevel == 0 {
						t.Errorf("column %s: error %v, want ErrColumnType for a repeated column", p, got.err)
					}
					continue
				}
				if c.Values == nil {
					if !errors.Is(got.err, ErrColumnType) {
						t.Errorf("column %s (DuckDB %s): error %v, want ErrColumnType", p, c.Type, got.err)
					}
					continue
				}
				if got.err != nil {
					t.Errorf("column %s (DuckDB %s): %v", p, c.Type, got.err)
					continue
				}
				if asTS {
					compareTS(t, p, got, c.Values)
				} else {
					compareText(t, p, got.text, c.Values)
				}
				if got.st.RowsRead != want.Rows {
					t.Errorf("column %s: %d rows read, want %d", p, got.st.RowsRead, want.Rows)
				}
			}
		})
	}
}

// hadoopLZ4Expect returns the values of hadoop_lz4_compressed.parquet (LZ4
// in Hadoop's framing, deprecated codec 5). DuckDB v1.5.6 cannot read that
// codec (expect.json holds its error), so the values are those of Arrow
// C++'s test of the file (cpp/src/parquet/reader_test.cc, TestCodec's
// SmallFileMetadataAndValues for LegacyLZ4Hadoop): 4 rows; c0 (INT64)
// 1593604800, 1593604800, 1593604801, 1593604801; c1 (BYTE_ARRAY) abc, def,
// abc, def; v11 (DOUBLE) 42.0, 7.7, 42.125, 7.7, not a type armtally maps.
// The same test expects the same values of lz4_raw_compressed.parquet, which
// DuckDB does read: its expect.json entry must agree. If expect.json comes
// to hold DuckDB's values of this file too, they must agree as well.
func hadoopLZ4Expect(t *testing.T, expect map[string]expectFile) expectFile {
	t.Helper()
	strs := func(v ...string) []*string {
		var out []*string
		for _, s := range v {
			out = append(out, &s)
		}
		return out
	}
	want := expectFile{Rows: 4, Columns: []expectColumn{
		{Path: "c0", Type: "BIGINT", Values: strs("1593604800", "1593604800", "1593604801", "1593604801")},
		{Path: "c1", Type: "VARCHAR", Values: strs("abc", "def", "abc", "def")},
		{Path: "v11", Type: "DOUBLE"},
	}}
	same := func(what string, got expectFile) {
		t.Helper()
		if got.Rows != want.Rows || len(got.Columns) != len(want.Columns) {
			t.Fatalf("%s: %d rows, %d columns; Arrow C++'s test: %d, %d", what, got.Rows, len(got.Columns), want.Rows, len(want.Columns))
		}
		for i, c := range got.Columns {
			w := want.Columns[i]
			if c.Path != w.Path || c.Type != w.Type || !slices.Equal(deref(c.Values), deref(w.Values)) {
				t.Fatalf("%s: column %s %s %v; Arrow C++'s test: %s %s %v", what, c.Path, c.Type, deref(c.Values), w.Path, w.Type, deref(w.Values))
			}
		}
	}
	same("expect.json's lz4_raw_compressed.parquet", expect["lz4_raw_compressed.parquet"])
	if e, ok := expect["hadoop_lz4_compressed.parquet"]; ok && e.Error == "" {
		same("expect.json's hadoop_lz4_compressed.parquet", e)
	}
	return want
}

func deref(v []*string) []string {
	var out []string
	for _, s := range v {
		if s == nil {
			out = append(out, "<null>")
			continue
		}
		out = append(out, *s)
	}
	return out
}

// compareText compares a column read as a segment with expected text; a
// null or empty expected value is a null segment (empty text becomes null
// in the logical table).
func compareText(t *testing.T, col string, got []string, want []*string) {
	t.Helper()
	if len(got) != len(want) {
		t.Errorf("column %s: %d values, want %d", col, len(got), len(want))
		return
	}
	bad := 0
	for i, w := range want {
		ws := "∅"
		if w != nil && *w != "" {
			ws = *w
		}
		if got[i] != ws {
			if bad++; bad <= 3 {
				t.Errorf("column %s row %d: %q, want %q", col, i+1, got[i], ws)
			}
		}
	}
}

// compareTS compares a column read as ts with expected nanoseconds (null
// rows are skipped by the reader and counted as null timestamps).
func compareTS(t *testing.T, col string, got columnRead, want []*string) {
	t.Helper()
	var ns []int64
	var nulls int64
	for _, w := range want {
		if w == nil {
			nulls++
			continue
		}
		v, err := strconv.ParseInt(*w, 10, 64)
		if err != nil {
			t.Fatalf("column %s: expected %q: %v", col, *w, err)
		}
		ns = append(ns, v)
	}
	if !slices.Equal(got.ts, ns) || got.nulls != nulls {
		t.Errorf("column %s: %v and %d nulls, want %v and %d nulls", col, got.ts, got.nulls, ns, nulls)
	}
}

// The two files with an upstream *_expect.csv: every column against it.
func TestParquetTestingDeltaExpect(t *testing.T) {
	dir := parquetTesting(t)
	for _, name := range []string{"delta_binary_packed", "delta_byte_array"} {
		t.Run(name, func(t *testing.T) {
			f, err := os.Open(filepath.Join(dir, "data", name+"_expect.csv"))
			if err != nil {
				t.Fatal(err)
			}
			defer f.Close()
			recs, err := csv.NewReader(f).ReadAll()
			if err != nil {
				t.Fatal(err)
			}
			data, err := os.ReadFile(filepath.Join(dir, "data", name+".parquet"))
			if err != nil {
				t.Fatal(err)
			}
			for j, col := range recs[0] {
				var want []*string
				for _, r := range recs[1:] {
					want = append(want, &r[j])
				}
				got := readParquetColumn(t, name+".parquet", data, col, false)
				if got.err != nil {
					t.Errorf("column %s: %v", col, got.err)
					continue
				}
				compareText(t, col, got.text, want)
			}
		})
	}
}

// int96_from_spark.parquet through the Reader: the values int96_from_spark.md
// gives as microseconds, 1704141296123456, 1704070800000000,
// 253402225200000000, 1735599600000000, null, 9089380393200000000; the
// third (year 9999) and sixth (year 290000) do not fit in int64
// nanoseconds and are counted as timestamp_out_of_range, the null as
// null_timestamp. (TestParquetInt96FromSpark checks each value's error.)
func TestParquetTestingInt96Reader(t *testing.T) {
	dir := parquetTesting(t)
	data, err := os.ReadFile(filepath.Join(dir, "data", "int96_from_spark.parquet"))
	if err != nil {
		t.Fatal(err)
	}
	got := readParquetColumn(t, "int96_from_spark.parquet", data, "a", true)
	if got.err != nil {
		t.Fatal(got.err)
	}
	want := []int64{1704141296123456 * 1000, 1704070800000000 * 1000, 1735599600000000 * 1000}
	if !slices.Equal(got.ts, want) {
		t.Errorf("ts %v, want %v", got.ts, want)
	}
	wantBad := []string{"null_timestamp 1", "timestamp_out_of_range 2"}
	var bad []string
	for _, rc := range got.st.BadRows {
		bad = append(bad, rc.Reason.String()+" "+strconv.FormatInt(rc.Count, 10))
	}
	if !slices.Equal(bad, wantBad) {
		t.Errorf("bad rows %v, want %v", bad, wantBad)
	}
	// The first out-of-range value is row 3, 9999-12-31T03:00:00Z (the
	// .md's 9999-12-31T01:00:00-02:00).
	for i, rc := range got.st.BadRows {
		if rc.Reason == ReasonTimestampRange {
			if e := got.st.BadRowExamples[i]; e.Row != 3 || e.Value != "9999-12-31T03:00:00Z" {
				t.Errorf("first out-of-range example %v, want row 3, 9999-12-31T03:00:00Z", e)
			}
		}
	}
}

// Every corrupt file (the two in data/ and all of bad_data/) gives an error
// that names the file and matches the sentinel of what is wrong, without a
// panic or a hang. Each leaf column is read in turn, as a segment or, for
// timestamp types, as the ts column.
func TestParquetTestingBad(t *testing.T) {
	dir := parquetTesting(t)
	tests := []struct {
		file string
		want error
		why  string
	}{
		{"bad_data/PARQUET-1481.parquet", ErrColumnType,
			"the schema's corrupted type leaves a column armtally cannot map; parquet-go opens the file"},
		{"bad_data/ARROW-RS-GH-6229-DICTHEADER.parquet", ErrCorrupt,
			"a negative value count in the dictionary page header: checkPages finds page headers that do not decode and chunks that lie outside the file"},
		{"bad_data/ARROW-RS-GH-6229-LEVELS.parquet", ErrColumnType,
			"insufficient repetition levels: its only column is repeated, which armtally refuses before reading a page"},
		{"bad_data/ARROW-GH-41321.parquet", io.ErrUnexpectedEOF,
			"fewer decoded levels than the page header's value count"},
		{"bad_data/ARROW-GH-45185.parquet", ErrColumnType,
			"repetition levels starting with 1: a repeated column, refused"},
		{"bad_data/ARROW-GH-47662.parquet", ErrColumnType,
			"nulls in a required FIXED_LEN_BYTE_ARRAY column: not a type armtally maps"},
		{"bad_data/ARROW-GH-41317.parquet", ErrCorrupt,
			"row group 0's page of column timestamp_us_no_tz has the page type INDEX_PAGE; TestParquetTestingGH41317 shows the metadata check"},
		{"data/datapage_v1-corrupt-checksum.parquet", parquet.ErrCorrupted,
			"page checksums that do not match"},
		{"data/nation.dict-malformed.parquet", ErrCorrupt,
			"a malformed dictionary: checkPages finds a page that claims 28 bytes where the chunk has 13 left"},
	}
	listed, err := filepath.Glob(filepath.Join(dir, "bad_data", "*.parquet"))
	if err != nil {
		t.Fatal(err)
	}
	covered := map[string]bool{filepath.Join(dir, "bad_data", "ARROW-GH-43605.parquet"): true} // TestParquetTestingGH43605
	for _, tc := range tests {
		covered[filepath.Join(dir, filepath.FromSlash(tc.file))] = true
	}
	for _, f := range listed {
		if !covered[f] {
			t.Errorf("%s: not in the table", f)
		}
	}
	for _, tc := range tests {
		t.Run(tc.file, func(t *testing.T) {
			path := filepath.Join(dir, filepath.FromSlash(tc.file))
			data, err := os.ReadFile(path)
			if err != nil {
				t.Fatal(err)
			}
			var pf *parquet.File
			within(t, "open", func() {
				pf, err = parquet.OpenFile(bytes.NewReader(data), int64(len(data)))
			})
			if err != nil {
				t.Fatalf("parquet-go cannot open it, so no column can be tried: %v", err)
			}
			var errs []error
			for _, col := range pf.Schema().Columns() {
				p := strings.Join(col, ".")
				asTS := false
				if leaf, ok := lookupLeaf(pf.Schema(), p); ok {
					asTS = isTimestampColumn(leaf.Node.Type())
				}
				got := readParquetColumn(t, path, data, p, asTS)
				if got.err == nil {
					continue
				}
				if errors.Is(got.err, errPanicked) {
					t.Errorf("column %s: parquet-go panicked: %v", p, got.err)
				}
				if !strings.HasPrefix(got.err.Error(), path+":") {
					t.Errorf("column %s: error does not name the file: %v", p, got.err)
				}
				errs = append(errs, got.err)
			}
			found := false
			for _, err := range errs {
				found = found || errors.Is(err, tc.want)
			}
			if !found {
				t.Errorf("no error matches %v (%s); errors: %v", tc.want, tc.why, errs)
			}
		})
	}
}

// ARROW-GH-43605.parquet: "dictionary index page uses rle encoding but 0 as
// rle bit-width" (bad_data/README.md). The data is readable and consistent:
// the dictionary has a single entry, so index 0 is the only index there is
// and a bit width of 0 is enough to write it. This test proves it: the one
// column's chunk holds one dictionary entry, and every row of the row group
// (as many as the metadata claims) reads back that entry, with no nulls.
func TestParquetTestingGH43605(t *testing.T) {
	dir := parquetTesting(t)
	path := filepath.Join(dir, "bad_data", "ARROW-GH-43605.parquet")
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	pf, err := parquet.OpenFile(bytes.NewReader(data), int64(len(data)))
	if err != nil {
		t.Fatal(err)
	}
	md := pf.Metadata()
	if len(md.RowGroups) != 1 || len(md.RowGroups[0].Columns) != 1 {
		t.Fatalf("want one row group of one column, got %d row groups", len(md.RowGroups))
	}
	rows := md.RowGroups[0].NumRows
	if cm := md.RowGroups[0].Columns[0].MetaData; cm.NumValues != rows || rows != 21186 { // parquet-cli meta: 21186 rows
		t.Fatalf("chunk claims %d values, row group %d rows", cm.NumValues, rows)
	}
	pages := pf.RowGroups()[0].ColumnChunks()[0].Pages()
	defer pages.Close()
	var entries []string
	var n int64
	for {
		page, err := pages.ReadPage()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		d := page.Dictionary()
		if d == nil || d.Len() != 1 {
			t.Fatalf("dictionary %v, want one entry", d)
		}
		entries = append(entries, d.Index(0).String())
		vals := make([]parquet.Value, page.NumValues())
		k, err := page.Values().ReadValues(vals)
		if err != nil && err != io.EOF {
			t.Fatal(err)
		}
		for _, v := range vals[:k] {
			if v.IsNull() || v.String() != entries[0] {
				t.Fatalf("value %v, want the dictionary's only entry %s", v, entries[0])
			}
		}
		n += int64(k)
		parquet.Release(page)
	}
	if n != rows {
		t.Fatalf("%d values, want %d", n, rows)
	}
	// And through the Reader: every row, each the entry's text.
	got := readParquetColumn(t, "ARROW-GH-43605.parquet", data, "min_fl", false)
	if got.err != nil || int64(len(got.text)) != rows {
		t.Fatalf("reader: %d rows, %v; want %d", len(got.text), got.err, rows)
	}
	for i, s := range got.text {
		if s != entries[0] {
			t.Fatalf("row %d: %q, want %q", i+1, s, entries[0])
		}
	}
}

// ARROW-GH-41317.parquet: "all columns have not the same size"
// (bad_data/README.md). Its row group 1 also names the chunk of column
// timestamp_us_no_tz "timestampWus_no_tz" in the metadata (parquet-go's
// metadata dump shows it). Reading stops earlier, at row group 0's corrupt
// page of that column (TestParquetTestingBad); this test runs the metadata
// check of row group 1 on its own.
func TestParquetTestingGH41317(t *testing.T) {
	dir := parquetTesting(t)
	path := filepath.Join(dir, "bad_data", "ARROW-GH-41317.parquet")
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	p, err := newPlan(Options{Mapping: Mapping{User: "string", TS: "timestamp_us_no_tz", Event: "string", Segments: []string{"uint8"}}})
	if err != nil {
		t.Fatal(err)
	}
	src := BytesSource("gh41317.parquet", data)
	o, _ := src.open()
	r, err := newParquetReader(src, o, p)
	if err != nil {
		t.Fatal(err)
	}
	defer r.close()
	r.rg, r.rgRows = 1, r.rowGroups[1].NumRows()
	want := map[string]string{
		"string":             "",
		"uint8":              "",
		"timestamp_us_no_tz": `corrupt parquet file: the column chunk's metadata names column "timestampWus_no_tz", the schema "timestamp_us_no_tz"`,
	}
	for _, c := range r.cols {
		err := r.checkChunk(c, r.rg, r.rgRows)
		if w := want[c.name]; (w == "" && err != nil) || (w != "" && (err == nil || err.Error() != w || !errors.Is(err, ErrCorrupt))) {
			t.Errorf("column %s: %v, want %q", c.name, err, w)
		}
	}
}

// Every single-byte corruption of the LZ4_RAW column chunks of
// lz4_raw_compressed.parquet ends in rows or an error, never a hang: without
// checkPages, parquet-go v0.32.0 loops (measured at byte 18 of the c0
// chunk and byte 185 of the c1 chunk, counted from the file's start).
func TestParquetLZ4RawCorruption(t *testing.T) {
	dir := parquetTesting(t)
	data, err := os.ReadFile(filepath.Join(dir, "data", "lz4_raw_compressed.parquet"))
	if err != nil {
		t.Fatal(err)
	}
	pf, err := parquet.OpenFile(bytes.NewReader(data), int64(len(data)))
	if err != nil {
		t.Fatal(err)
	}
	rg := pf.Metadata().RowGroups[0]
	detected := 0
	for ci, col := range []string{"c0", "c1"} {
		md := rg.Columns[ci].MetaData
		for pos := md.DataPageOffset; pos < md.DataPageOffset+md.TotalCompressedSize; pos++ {
			bad := bytes.Clone(data)
			bad[pos] ^= 0xa5
			got := readParquetColumn(t, "lz4.parquet", bad, col, false)
			if errors.Is(got.err, errPanicked) {
				t.Errorf("byte %d: parquet-go panicked: %v", pos, got.err)
			}
			if errors.Is(got.err, ErrCorrupt) {
				detected++
			}
		}
	}
	if detected == 0 {
		t.Error("no corruption detected as ErrCorrupt")
	}
	t.Logf("%d corruptions detected as ErrCorrupt", detected)
}
