package ingest

import (
	"encoding/csv"
	"errors"
	"path/filepath"
	"strings"
	"testing"

	"github.com/apache/arrow-go/v18/arrow/array"
)

func TestCSVFile(t *testing.T) {
	// testdata/events_bom_crlf.csv starts with a UTF-8 byte-order mark, ends
	// its lines with CRLF, quotes some fields (one holds a comma, one spans
	// two lines) and leaves experiment, arm and country empty on two rows.
	m := DefaultMapping()
	m.Segments = []string{"country"}
	srcs, err := FileSources([]string{filepath.Join("testdata", "events_bom_crlf.csv")})
	if err != nil {
		t.Fatal(err)
	}
	for _, bs := range []int{0, 1, 3} {
		rows, st, err := readAll(t, srcs, Options{Mapping: m, ExposureEvent: "exposure", BatchSize: bs})
		if err != nil {
			t.Fatal(err)
		}
		equalRows(t, rows, []string{
			// 10:30 at +02:00 is 08:30 UTC
			"u1 | 2026-03-15T08:30:00Z | exposure | checkout-redesign | control | DE",
			// empty experiment, arm and country become null
			"u2 | 2026-03-15T08:31:00Z | add to cart, twice | ∅ | ∅ | ∅",
			// encoding/csv turns the CRLF inside a quoted field into LF
			"u3 | 2026-03-15T00:00:00Z | exposure | checkout-redesign | treatment\ntwo-line | FR",
			"u4 | 2026-03-15T09:00:00.25Z | purchase | ∅ | ∅ | US",
		})
		if st.Files != 1 || st.RowsRead != 4 || st.Rows != 4 {
			t.Errorf("batch size %d: stats %+v, want 1 file, 4 rows read, 4 rows", bs, st)
		}
	}
}

func TestCSVTimestampValues(t *testing.T) {
	// The same instants as TestCSVFile, read as nanoseconds: GNU date 9.1,
	// date -u -d '2026-03-15T10:30:00+02:00' +%s = 1773563400, and
	// date -u -d '2026-03-15 00:00:00 UTC' +%s = 1773532800.
	srcs := []Source{BytesSource("t.csv", []byte("user_id,ts,event\nu1,2026-03-15T10:30:00+02:00,view\nu2,2026-03-15,view\n"))}
	m := DefaultMapping()
	m.Experiment, m.Arm = "", ""
	r, err := NewReader(srcs, Options{Mapping: m})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if !r.Next() {
		t.Fatal(r.Err())
	}
	ts := r.RecordBatch().Column(colTS).(*array.Timestamp)
	if got := []int64{int64(ts.Value(0)), int64(ts.Value(1))}; got[0] != 1773563400e9 || got[1] != 1773532800e9 {
		t.Errorf("ts = %d, want [1773563400e9 1773532800e9]", got)
	}
	if r.Next() || r.Err() != nil {
		t.Errorf("second batch or error: %v", r.Err())
	}
}

// marked returns in without its § marker and the 1-based line on which the
// marker stood: the line an error must report.
func marked(t *testing.T, in string) (string, int64) {
	t.Helper()
	i := strings.Index(in, "§")
	if i < 0 {
		t.Fatalf("no § marker in %q", in)
	}
	return in[:i] + in[i+len("§"):], int64(strings.Count(in[:i], "\n") + 1)
}

// Each input marks the field at fault with §; the error must name that
// field's physical line (the header is line 1) and column.
func TestCSVBadRows(t *testing.T) {
	const head = "user_id,ts,event,experiment,arm\n"
	tests := []struct {
		name   string
		in     string
		unit   string
		column string
		value  string
		err    error
		msg    string // exact message, when checked
		read   int64  // records read, the bad one included
	}{
		{name: "bad timestamp", read: 2, in: head + "u1,2026-03-01,view,,\nu2,§2026-13-01,view,,\n",
			column: "ts", value: "2026-13-01", err: ErrBadTimestamp,
			msg: `t.csv:3: column "ts": cannot parse "2026-13-01" as a timestamp (want RFC 3339 or YYYY-MM-DD[ HH:MM:SS[.frac]])`},
		{name: "null user", read: 1, in: head + "§,2026-03-01,view,,\n",
			column: "user_id", err: ErrNullUser,
			msg: `t.csv:2: column "user_id": null or empty user id`},
		{name: "empty timestamp", read: 1, in: head + "u1,§,view,,\n", column: "ts", err: ErrNullTimestamp},
		{name: "timestamp out of range", read: 1, in: head + "u1,§9999-12-31,view,,\n",
			column: "ts", value: "9999-12-31", err: ErrTimestampRange,
			msg: `t.csv:2: column "ts": timestamp "9999-12-31" is outside the range of nanosecond timestamps (1677-09-21 to 2262-04-11)`},
		{name: "epoch without unit", read: 1, in: head + "u1,§1773532800,view,,\n",
			column: "ts", value: "1773532800", err: ErrBadTimestamp,
			msg: `t.csv:2: column "ts": cannot parse "1773532800" as a timestamp (want RFC 3339 or YYYY-MM-DD[ HH:MM:SS[.frac]], or set the epoch unit for integer timestamps)`},
		{name: "epoch out of range", read: 1, in: head + "u1,§9223372037,view,,\n", unit: "s",
			column: "ts", value: "9223372037", err: ErrTimestampRange},
		{name: "null event", read: 2, in: head + "u1,2026-03-01,view,,\nu1,2026-03-01,§,,\n", column: "event", err: ErrNullEvent},
		{name: "exposure without arm", read: 1, in: head + "u1,2026-03-01,exposure,exp-1,§\n",
			column: "arm", err: ErrNoArm,
			msg: `t.csv:2: column "arm": exposure row without an arm`},
		{name: "too few fields", read: 2, in: head + "u1,2026-03-01,view,,\n§u2,2026-03-01\n", value: "2", err: ErrFieldCount,
			msg: `t.csv:3: wrong number of fields: got 2, the header has 5`},
		// The quoted user id spans lines 2 and 3, so the ts field after it
		// is on line 3 and the next record starts on line 4.
		{name: "after a multi-line field", read: 1, in: head + "\"u\n1\",§2026-02-30,view,,\n",
			column: "ts", value: "2026-02-30", err: ErrBadTimestamp},
		{name: "line after a multi-line field", read: 2, in: head + "\"u\n1\",2026-03-01,view,,\n§,2026-03-01,view,,\n",
			column: "user_id", err: ErrNullUser},
		{name: "CRLF", read: 2, in: strings.ReplaceAll(head+"u1,2026-03-01,view,,\nu1,2026-03-01,§,,\n", "\n", "\r\n"),
			column: "event", err: ErrNullEvent},
		{name: "BOM", read: 1, in: "\uFEFF" + head + "§,2026-03-01,view,,\n", column: "user_id", err: ErrNullUser},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			in, line := marked(t, tc.in)
			m := DefaultMapping()
			m.EpochUnit = tc.unit
			_, st, err := readAll(t, []Source{BytesSource("t.csv", []byte(in))}, Options{Mapping: m, ExposureEvent: "exposure"})
			if !errors.Is(err, tc.err) {
				t.Fatalf("error %v, want %v", err, tc.err)
			}
			var re *RowError
			if !errors.As(err, &re) {
				t.Fatalf("error %T, want *RowError", err)
			}
			if re.File != "t.csv" || re.Row != line || re.RowGroup != -1 || re.Column != tc.column || re.Value != tc.value {
				t.Errorf("got %+v, want file t.csv, row %d, row group -1, column %q, value %q", *re, line, tc.column, tc.value)
			}
			if tc.msg != "" && err.Error() != tc.msg {
				t.Errorf("message\n got %s\nwant %s", err, tc.msg)
			}
			// Every record up to the bad one is read; the bad one is the last.
			if st.RowsRead != tc.read {
				t.Errorf("rows read %d, want %d", st.RowsRead, tc.read)
			}
		})
	}
}

func TestCSVEpochUnit(t *testing.T) {
	// date -u -d '2024-01-01 12:34:56 UTC' +%s = 1704112496; .123 s more in ms.
	in := "user_id,ts,event\n42,1704112496123,view\n43,2024-01-01 12:34:56,view\n44,-1,view\n"
	m := Mapping{User: "user_id", TS: "ts", Event: "event", EpochUnit: "ms"}
	rows, _, err := readAll(t, []Source{BytesSource("t.csv", []byte(in))}, Options{Mapping: m})
	if err != nil {
		t.Fatal(err)
	}
	equalRows(t, rows, []string{
		"42 | 2024-01-01T12:34:56.123Z | view",
		"43 | 2024-01-01T12:34:56Z | view", // text still parses with a unit set
		"44 | 1969-12-31T23:59:59.999Z | view",
	})
}

func TestCSVFileErrors(t *testing.T) {
	tests := []struct {
		name string
		in   string
		is   error
		msg  string
	}{
		{name: "missing column", in: "user_id,ts,event\n", is: ErrMissingColumn,
			msg: `t.csv: column "experiment": missing column (the file has: user_id, ts, event)`},
		{name: "duplicate column", in: "user_id,ts,event,experiment,arm,ts\n", is: ErrColumnType,
			msg: `t.csv: column "ts": unsupported column type (the header names it more than once)`},
		{name: "empty file", in: "", msg: "t.csv: empty file: want a header row"},
		{name: "bare quote", in: "user_id,ts,event,experiment,arm\nu\"1,2026-03-01,view,,\n", is: csv.ErrBareQuote,
			// encoding/csv counts columns from 1 in bytes: the quote is byte 2
			msg: `t.csv: parse error on line 2, column 2: bare " in non-quoted-field`},
		{name: "unclosed quote", in: "user_id,ts,event,experiment,arm\n\"u1,2026-03-01,view,,\n", is: csv.ErrQuote},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, _, err := readAll(t, []Source{BytesSource("t.csv", []byte(tc.in))}, Options{Mapping: DefaultMapping()})
			if err == nil {
				t.Fatal("no error")
			}
			if tc.is != nil && !errors.Is(err, tc.is) {
				t.Errorf("error %v, want errors.Is %v", err, tc.is)
			}
			if tc.msg != "" && err.Error() != tc.msg {
				t.Errorf("message\n got %s\nwant %s", err, tc.msg)
			}
		})
	}
}
