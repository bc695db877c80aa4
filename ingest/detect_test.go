package ingest

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// readErr reads sources through the event reader and through the unit
// table reader and returns both errors.
func readErr(t *testing.T, src Source) (events, table error) {
	t.Helper()
	_, _, events = readAll(t, []Source{src}, Options{Mapping: Mapping{User: "id", TS: "timestamp_col", Event: "string_col"}})
	tr, err := NewUnitTableReader([]Source{src}, UnitTableOptions{Unit: "id", Arm: "string_col", Metrics: []ColumnMap{{"b", "bool_col"}}})
	if err != nil {
		t.Fatal(err)
	}
	defer tr.Close()
	for tr.Next() {
	}
	return events, tr.Err()
}

// A Parquet file is "PAR1", the column chunks, the footer, the footer's
// length in 4 bytes and "PAR1" again (the file layout of the Apache
// Parquet format specification), so it has at least 12 bytes and ends in
// the magic. alltypes_plain.parquet (1,851 bytes) cut at several lengths is
// reported as truncated, ErrCorrupt, by both readers, instead of
// parquet-go's "invalid magic footer" or "reading magic header: EOF".
func TestParquetTruncated(t *testing.T) {
	data, err := os.ReadFile(filepath.Join(parquetTesting(t), "data", "alltypes_plain.parquet"))
	if err != nil {
		t.Fatal(err)
	}
	if len(data) != 1851 {
		t.Fatalf("alltypes_plain.parquet has %d bytes; the test expects 1851", len(data))
	}
	tests := []struct {
		n    int
		want string
	}{
		{1, "truncated Parquet file (1 byte; too short to hold a footer)"},
		{3, "truncated Parquet file (3 bytes; too short to hold a footer)"},
		{4, "truncated Parquet file (4 bytes; too short to hold a footer)"},
		{8, "truncated Parquet file (8 bytes; too short to hold a footer)"},
		{11, "truncated Parquet file (11 bytes; too short to hold a footer)"},
		{12, "truncated Parquet file (12 bytes; no footer: the last 4 bytes are not PAR1)"},
		{100, "truncated Parquet file (100 bytes; no footer: the last 4 bytes are not PAR1)"},
		{1000, "truncated Parquet file (1000 bytes; no footer: the last 4 bytes are not PAR1)"},
		{1850, "truncated Parquet file (1850 bytes; no footer: the last 4 bytes are not PAR1)"},
	}
	for _, tc := range tests {
		t.Run(fmt.Sprint(tc.n), func(t *testing.T) {
			events, table := readErr(t, BytesSource("cut.parquet", data[:tc.n]))
			for _, err := range []error{events, table} {
				if err == nil || err.Error() != "cut.parquet: "+tc.want || !errors.Is(err, ErrCorrupt) {
					t.Errorf("error %v, want ErrCorrupt %q", err, "cut.parquet: "+tc.want)
				}
			}
		})
	}
	// The whole file still reads.
	if events, table := readErr(t, BytesSource("whole.parquet", data)); events != nil || table != nil {
		t.Errorf("the whole file: %v, %v", events, table)
	}
}

// The first bytes of a file named as Parquet that is not one say what it
// holds: gzip's magic 0x1f 0x8b (RFC 1952, 2.3.1), text, nothing, or other
// bytes; Parquet's magic at the end only is a corrupt start.
func TestParquetNameOtherContent(t *testing.T) {
	pq, err := os.ReadFile(filepath.Join(parquetTesting(t), "data", "alltypes_plain.parquet"))
	if err != nil {
		t.Fatal(err)
	}
	text := "user_id,ts,event\nu1,2026-03-01,view\n"
	long := strings.Repeat("é", 40) + "\n" // cut at 32 bytes, inside no character
	badStart := bytes.Clone(pq)
	copy(badStart, "PAR0")
	tests := []struct {
		name string
		data []byte
		is   error
		want string
	}{
		{"csv", []byte(text), ErrFormat, `not a Parquet file: it holds text starting "user_id,ts,event" (CSV is named .csv)`},
		{"crlf", []byte("a;b\r\n1;2\r\n"), ErrFormat, `not a Parquet file: it holds text starting "a;b" (CSV is named .csv)`},
		{"long line", []byte(long), ErrFormat, `not a Parquet file: it holds text starting "` + strings.Repeat("é", 16) + `" (CSV is named .csv)`},
		{"gzip", gzipped(t, text), ErrFormat, "not a Parquet file: it holds gzip-compressed data (compressed CSV is named .csv or .csv.gz)"},
		{"empty", nil, ErrFormat, "not a Parquet file: the file is empty"},
		{"binary", []byte{0, 1, 2, 0xff, 'P', 'A', 'R', '1', 9, 9}, ErrFormat, "not a Parquet file: it starts with the bytes 00 01 02 ff 50 41 52 31, not PAR1"},
		{"bad start", badStart, ErrCorrupt, `corrupt parquet file: it ends like a Parquet file but starts with "PAR0", not PAR1`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			events, table := readErr(t, BytesSource("x.parquet", tc.data))
			for _, err := range []error{events, table} {
				if err == nil || err.Error() != "x.parquet: "+tc.want || !errors.Is(err, tc.is) {
					t.Errorf("error %v, want %v %q", err, tc.is, "x.parquet: "+tc.want)
				}
			}
		})
	}
}

// A Parquet file named .csv (it starts with "PAR1") is refused with an
// error that says so, through the event reader, the table reader and
// OpenCSV, instead of being parsed as CSV (before: a missing column whose
// message listed the file's binary first line as its header).
func TestCSVNameParquetContent(t *testing.T) {
	pq, err := os.ReadFile(filepath.Join(parquetTesting(t), "data", "alltypes_plain.parquet"))
	if err != nil {
		t.Fatal(err)
	}
	const want = "p.csv: not a CSV file: it holds Parquet data (it starts with PAR1); name it .parquet or .parq"
	src := BytesSource("p.csv", pq)
	events, table := readErr(t, src)
	_, open := OpenCSV(src, 0)
	for _, err := range []error{events, table, open} {
		if err == nil || err.Error() != want || !errors.Is(err, ErrFormat) {
			t.Errorf("error %v, want ErrFormat %q", err, want)
		}
	}
}

// A gzip-compressed CSV file named .csv on disk is read by its content:
// the rows come out, not "bare \" in non-quoted-field" from parsing the
// compressed bytes as text. Its text has quoted fields so that a quote is
// at hand in either reading.
func TestGzipNamedCSVFile(t *testing.T) {
	text := "user_id,ts,event,note\nu1,2026-03-01,view,\"a, \"\"b\"\"\"\nu2,2026-03-02,buy,c\n"
	path := filepath.Join(t.TempDir(), "events.csv")
	if err := os.WriteFile(path, gzipped(t, text), 0o600); err != nil {
		t.Fatal(err)
	}
	rows, st, err := readAll(t, fileSource(t, path), Options{Mapping: Mapping{User: "user_id", TS: "ts", Event: "event", Segments: []string{"note"}}})
	if err != nil {
		t.Fatal(err)
	}
	equalRows(t, rows, []string{`u1 | 2026-03-01T00:00:00Z | view | a, "b"`, "u2 | 2026-03-02T00:00:00Z | buy | c"})
	if st.RowsRead != 2 {
		t.Errorf("rows read %d, want 2", st.RowsRead)
	}
}
