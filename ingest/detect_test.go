package ingest

import (
	"bytes"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/format"
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

// dictPageBody returns where the body of the first page (here the
// dictionary page) of the column chunk of leaf column col in row group 0
// starts, its length in bytes and its header's checksum.
func dictPageBody(t *testing.T, data []byte, col int) (start, n int64, crc int32) {
	t.Helper()
	pf, err := parquet.OpenFile(bytes.NewReader(data), int64(len(data)))
	if err != nil {
		t.Fatal(err)
	}
	md := pf.Metadata().RowGroups[0].Columns[col].MetaData
	pos := chunkStart(&md)
	var buf []byte
	h, hlen, err := readPageHeader(bytes.NewReader(data), pos, pos+md.TotalCompressedSize, 0, &buf)
	if err != nil || h.Type != format.DictionaryPage {
		t.Fatalf("column %d: first page %v, %v; want a dictionary page", col, h.Type, err)
	}
	return pos + hlen, int64(h.CompressedPageSize), h.CRC
}

// What the README says about checksums: a page whose header carries a
// CRC-32 of its bytes (the Parquet format's optional page checksum) is
// checked when it is read, so one changed byte stops the read with
// ErrCorrupt; in a file written without page checksums the same change
// reads without an error and changes a value. The changed byte is the
// last of a BYTE_ARRAY dictionary page, XOR 0x08.
func TestPageChecksums(t *testing.T) {
	dir := filepath.Join(parquetTesting(t), "data")

	// plain-dict-uncompressed-checksum.parquet: column 1, binary_field,
	// has a dictionary page with a checksum.
	data, err := os.ReadFile(filepath.Join(dir, "plain-dict-uncompressed-checksum.parquet"))
	if err != nil {
		t.Fatal(err)
	}
	start, n, crc := dictPageBody(t, data, 1)
	if crc == 0 {
		t.Fatal("binary_field's dictionary page has no checksum")
	}
	if got := readParquetColumn(t, "crc.parquet", data, "binary_field", false); got.err != nil {
		t.Fatalf("undamaged: %v", got.err)
	}
	data[start+n-1] ^= 0x08
	got := readParquetColumn(t, "crc.parquet", data, "binary_field", false)
	if !errors.Is(got.err, ErrCorrupt) || !errors.Is(got.err, parquet.ErrCorrupted) ||
		!strings.Contains(got.err.Error(), "crc32 checksum mismatch") {
		t.Errorf("checksummed page changed: %v, want ErrCorrupt from a checksum mismatch", got.err)
	}

	// alltypes_plain.parquet: column 9, string_col, has a dictionary of
	// "0" and "1" (its bytes: length 1, "0", length 1, "1") without a
	// checksum; "1" becomes "9".
	data, err = os.ReadFile(filepath.Join(dir, "alltypes_plain.parquet"))
	if err != nil {
		t.Fatal(err)
	}
	start, n, crc = dictPageBody(t, data, 9)
	if crc != 0 || string(data[start:start+n]) != "\x01\x00\x00\x000\x01\x00\x00\x001" {
		t.Fatalf("string_col's dictionary page: checksum %d, body %q", crc, data[start:start+n])
	}
	data[start+n-1] ^= 0x08
	got = readParquetColumn(t, "plain.parquet", data, "string_col", false)
	if got.err != nil {
		t.Fatalf("page without a checksum changed: %v, want no error", got.err)
	}
	seen := map[string]int{}
	for _, s := range got.text {
		seen[s]++
	}
	if seen["9"] == 0 || seen["1"] != 0 || seen["0"]+seen["9"] != len(got.text) {
		t.Errorf("values %v, want only 0 and 9", seen)
	}
}
