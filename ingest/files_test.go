package ingest

import (
	"bytes"
	"compress/gzip"
	"errors"
	"path/filepath"
	"strings"
	"testing"
)

func gzipped(t *testing.T, members ...string) []byte {
	t.Helper()
	var buf bytes.Buffer
	for _, m := range members {
		zw := gzip.NewWriter(&buf)
		if _, err := zw.Write([]byte(m)); err != nil {
			t.Fatal(err)
		}
		if err := zw.Close(); err != nil {
			t.Fatal(err)
		}
	}
	return buf.Bytes()
}

func TestCSVGzip(t *testing.T) {
	m := Mapping{User: "user_id", TS: "ts", Event: "event"}
	// Two gzip members, the second starting in the middle of a record,
	// and a BOM and CRLF line ends inside the compressed text.
	data := gzipped(t, "\uFEFFuser_id,ts,event\r\nu1,2026-03-01,view\r\nu2,2026-03-", "02,buy\r\n")
	rows, st, err := readAll(t, []Source{BytesSource("e.csv.gz", data)}, Options{Mapping: m})
	if err != nil {
		t.Fatal(err)
	}
	equalRows(t, rows, []string{"u1 | 2026-03-01T00:00:00Z | view", "u2 | 2026-03-02T00:00:00Z | buy"})
	if st.RowsRead != 2 {
		t.Errorf("rows read %d, want 2", st.RowsRead)
	}

	// A bad row's line is the line in the decompressed text.
	data = gzipped(t, "user_id,ts,event\nu1,2026-03-01,view\n", "u2,2026-02-30,view\n")
	_, _, err = readAll(t, []Source{BytesSource("e.csv.gz", data)}, Options{Mapping: m})
	if want := `e.csv.gz:3: column "ts": cannot parse "2026-02-30" as a timestamp (want RFC 3339 or YYYY-MM-DD[ HH:MM:SS[.frac]])`; err == nil || err.Error() != want {
		t.Errorf("error %v, want %s", err, want)
	}

	good := gzipped(t, "user_id,ts,event\nu1,2026-03-01,view\n")
	corrupt := bytes.Clone(good)
	corrupt[len(corrupt)-8] ^= 0xff // the CRC-32 of the member (RFC 1952, section 2.2)
	tests := []struct {
		name string
		data []byte
		is   error
	}{
		{"bad header", append([]byte{0x1f, 0x8b, 99}, good[3:]...), gzip.ErrHeader}, // CM 99 is no method (RFC 1952, 2.3.1)
		{"checksum", corrupt, gzip.ErrChecksum},
		{"truncated", good[:len(good)-4], nil}, // io.ErrUnexpectedEOF inside flate
		{"empty", nil, nil},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, _, err := readAll(t, []Source{BytesSource("bad.csv.gz", tc.data)}, Options{Mapping: m})
			if err == nil || !strings.HasPrefix(err.Error(), "bad.csv.gz: ") {
				t.Fatalf("error %v, want one naming bad.csv.gz", err)
			}
			if tc.is != nil && !errors.Is(err, tc.is) {
				t.Errorf("error %v, want errors.Is %v", err, tc.is)
			}
		})
	}
}

// TestCSVGzipByContent checks that gzip is told by the data's first two
// bytes, 0x1f 0x8b (RFC 1952, 2.3.1), not by the name: a .csv.gz that is
// plain text and a compressed file named .csv read the same rows, through
// the event reader, the table reader and OpenCSV.
func TestCSVGzipByContent(t *testing.T) {
	text := "user_id,ts,event,arm,buy\nu1,2026-03-01,view,a,1\nu2,2026-03-02,buy,b,0\n"
	want := []string{"u1 | 2026-03-01T00:00:00Z | view", "u2 | 2026-03-02T00:00:00Z | buy"}
	tests := []struct {
		name string
		data []byte
		gzip bool
	}{
		{"plain.csv.gz", []byte(text), false},
		{"packed.csv", gzipped(t, text), true},
		{"packed.csv.gz", gzipped(t, text), true},
		{"plain.csv", []byte(text), false},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			src := BytesSource(tc.name, tc.data)
			rows, _, err := readAll(t, []Source{src}, Options{Mapping: Mapping{User: "user_id", TS: "ts", Event: "event"}})
			if err != nil {
				t.Fatal(err)
			}
			equalRows(t, rows, want)

			tr, err := NewUnitTableReader([]Source{src}, UnitTableOptions{Unit: "user_id", Arm: "arm", Metrics: []ColumnMap{{"buy", "buy"}}})
			if err != nil {
				t.Fatal(err)
			}
			defer tr.Close()
			var n int64
			for tr.Next() {
				n += tr.RecordBatch().NumRows()
			}
			if tr.Err() != nil || n != 2 {
				t.Errorf("table reader: %d rows, error %v; want 2 rows", n, tr.Err())
			}

			f, err := OpenCSV(src, 0)
			if err != nil {
				t.Fatal(err)
			}
			defer f.Close()
			if f.Gzipped() != tc.gzip || strings.Join(f.Header(), ",") != "user_id,ts,event,arm,buy" {
				t.Errorf("OpenCSV: gzipped %v, header %q", f.Gzipped(), f.Header())
			}
		})
	}
}

func TestCSVDelimiter(t *testing.T) {
	m := Mapping{User: "user_id", TS: "ts", Event: "event", Segments: []string{"note"}}
	tests := []struct {
		name  string
		delim rune
		in    string
	}{
		{"tab", '\t', "user_id\tts\tevent\tnote\nu1\t2026-03-01 10:00:00\tview\t\"a\tb, c\"\n"},
		{"semicolon", ';', "user_id;ts;event;note\nu1;2026-03-01 10:00:00;view;\"a\tb, c\"\n"},
		{"comma", 0, "user_id,ts,event,note\nu1,2026-03-01 10:00:00,view,\"a\tb, c\"\n"},
		{"multi-byte", '¦', "user_id¦ts¦event¦note\nu1¦2026-03-01 10:00:00¦view¦\"a\tb, c\"\n"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			rows, _, err := readAll(t, []Source{BytesSource("e.csv", []byte(tc.in))}, Options{Mapping: m, Delimiter: tc.delim})
			if err != nil {
				t.Fatal(err)
			}
			// The quoted note keeps its tab and comma (RFC 4180 quoting).
			equalRows(t, rows, []string{"u1 | 2026-03-01T10:00:00Z | view | a\tb, c"})
		})
	}
	// With the wrong delimiter the header is one column.
	_, _, err := readAll(t, []Source{BytesSource("e.csv", []byte(tests[0].in))}, Options{Mapping: m})
	if !errors.Is(err, ErrMissingColumn) {
		t.Errorf("tab file read with ',': error %v, want ErrMissingColumn", err)
	}
	for _, d := range []rune{'"', '\r', '\n', 0xFFFD, -1} {
		if _, err := NewReader(nil, Options{Mapping: m, Delimiter: d}); err == nil {
			t.Errorf("delimiter %q accepted", d)
		}
	}
}

// partitioned returns the sources of a Hive-style tree of CSV files.
func partitioned(t *testing.T, files map[string]string) []Source {
	t.Helper()
	dir := t.TempDir()
	data := map[string][]byte{}
	for k, v := range files {
		data[k] = []byte(v)
	}
	writeFiles(t, dir, data)
	srcs, err := FileSources([]string{filepath.Join(dir, "root")})
	if err != nil {
		t.Fatal(err)
	}
	return srcs
}

func TestPartitionColumns(t *testing.T) {
	srcs := partitioned(t, map[string]string{
		"root/experiment=checkout-2026/dt=2026-11-30/country=br/p.csv": "user_id,event,arm\nu1,exposure,control\nu2,buy,\n",
		"root/experiment=checkout-2026/dt=2026-12-01/country=de/p.csv": "user_id,event,arm\nu3,exposure,fast\n",
		// country is also a column: the file's column wins.
		"root/experiment=checkout-2026/dt=2026-12-01/country=fr/p.csv": "user_id,event,arm,country\nu4,exposure,fast,es\n",
	})
	m := Mapping{User: "user_id", TS: "dt", Event: "event", Experiment: "experiment", Arm: "arm", Segments: []string{"country"}}
	rows, st, err := readAll(t, srcs, Options{Mapping: m, ExposureEvent: "exposure"})
	if err != nil {
		t.Fatal(err)
	}
	// Each row carries its folders' values; dt is midnight UTC.
	equalRows(t, rows, []string{
		"u1 | 2026-11-30T00:00:00Z | exposure | checkout-2026 | control | br",
		"u2 | 2026-11-30T00:00:00Z | buy | checkout-2026 | ∅ | br",
		"u3 | 2026-12-01T00:00:00Z | exposure | checkout-2026 | fast | de",
		"u4 | 2026-12-01T00:00:00Z | exposure | checkout-2026 | fast | es",
	})
	if st.Files != 3 || st.RowsRead != 4 {
		t.Errorf("stats %+v, want 3 files, 4 rows", st)
	}
}

func TestPartitionColumnErrors(t *testing.T) {
	// The second file lacks the dt folder.
	srcs := partitioned(t, map[string]string{
		"root/a/dt=2026-11-30/p.csv": "user_id,event\nu1,view\n",
		"root/b/p.csv":               "user_id,event\nu2,view\n",
	})
	m := Mapping{User: "user_id", TS: "dt", Event: "event"}
	_, st, err := readAll(t, srcs, Options{Mapping: m})
	var ce *ColumnError
	if !errors.As(err, &ce) || !errors.Is(err, ErrMissingColumn) || ce.File != srcs[1].Name || ce.Column != "dt" {
		t.Fatalf("error %v, want a missing column dt in %s", err, srcs[1].Name)
	}
	if want := srcs[1].Name + `: column "dt": missing column (the file has: user_id, event)`; err.Error() != want {
		t.Errorf("message\n got %s\nwant %s", err, want)
	}
	if st.Rows != 1 {
		t.Errorf("rows %d, want the first file's 1", st.Rows)
	}
	// With partitions, the message lists their keys too.
	_, _, err = readAll(t, srcs[:1], Options{Mapping: Mapping{User: "user_id", TS: "day", Event: "event"}})
	if want := srcs[0].Name + `: column "day": missing column (the file has: user_id, event; partition keys: dt)`; err == nil || err.Error() != want {
		t.Errorf("message\n got %v\nwant %s", err, want)
	}

	// A partition value that is not a timestamp makes every row of the
	// file bad, named by the key.
	srcs = partitioned(t, map[string]string{"root/dt=20261130/p.csv": "user_id,event\nu1,view\nu2,view\n"})
	_, st, err = readAll(t, srcs, Options{Mapping: m, MaxBadRows: NoLimit})
	if err != nil || len(st.BadRows) != 1 || st.BadRows[0].Reason != "bad_timestamp" || st.BadRows[0].Count != 2 {
		t.Fatalf("stats %+v, %v; want 2 bad timestamps", st, err)
	}
	if want := srcs[0].Name + `:2: column "dt": cannot parse "20261130" as a timestamp (want RFC 3339 or YYYY-MM-DD[ HH:MM:SS[.frac]], or set the epoch unit for integer timestamps)`; st.BadRowExamples[0].Error() != want {
		t.Errorf("example\n got %s\nwant %s", st.BadRowExamples[0], want)
	}
}

// Partition values reach Parquet files too, and BytesSource takes them.
func TestPartitionColumnsParquet(t *testing.T) {
	type event struct {
		User  int64  `parquet:"uid"`
		Event string `parquet:"event"`
	}
	data := writeParquet(t, []event{{42, "view"}, {43, "buy"}})
	src := BytesSource("p.parquet", data)
	src.Partitions = []Partition{{Key: "hour", Value: "2026-11-30 13:00:00"}, {Key: "country", Value: ""}}
	m := Mapping{User: "uid", TS: "hour", Event: "event", Segments: []string{"country"}}
	rows, _, err := readAll(t, []Source{src}, Options{Mapping: m})
	if err != nil {
		t.Fatal(err)
	}
	// An empty partition value (a null folder) is a null segment.
	equalRows(t, rows, []string{"42 | 2026-11-30T13:00:00Z | view | ∅", "43 | 2026-11-30T13:00:00Z | buy | ∅"})
}
