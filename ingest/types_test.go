package ingest

import (
	"bytes"
	"errors"
	"testing"

	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/deprecated"
)

// oneColumn writes a Parquet file with one optional column "c" of the given
// type; a nil value is a null.
func oneColumn(t *testing.T, node parquet.Node, vals []*parquet.Value) []byte {
	t.Helper()
	schema := parquet.NewSchema("t", parquet.Group{"c": parquet.Optional(node)})
	var buf bytes.Buffer
	w := parquet.NewWriter(&buf, schema)
	for _, v := range vals {
		row := parquet.Row{parquet.NullValue().Level(0, 0, 0)}
		if v != nil {
			row[0] = v.Level(0, 1, 0)
		}
		if _, err := w.WriteRows([]parquet.Row{row}); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

func val(v parquet.Value) *parquet.Value { return &v }

// tableTS reads v, a value of a column of type node, as the exposure time
// of a one-row unit table through the TableReader, and returns it as RFC
// 3339 text or the reader's error.
func tableTS(t *testing.T, node parquet.Node, unit string, v parquet.Value) (string, error) {
	t.Helper()
	schema := parquet.NewSchema("t", parquet.Group{"u": parquet.String(), "a": parquet.String(), "m": parquet.Int(32), "c": parquet.Optional(node)})
	var buf bytes.Buffer
	w := parquet.NewWriter(&buf, schema)
	row := parquet.Row{parquet.ByteArrayValue([]byte("a")).Level(0, 0, 0), v.Level(0, 1, 1),
		parquet.Int32Value(1).Level(0, 0, 2), parquet.ByteArrayValue([]byte("unit-1")).Level(0, 0, 3)}
	if _, err := w.WriteRows([]parquet.Row{row}); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	r, err := NewUnitTableReader([]Source{BytesSource("ts.parquet", buf.Bytes())},
		UnitTableOptions{Unit: "u", Arm: "a", TS: "c", EpochUnit: unit, Metrics: []ColumnMap{{"m", "m"}}})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	var got string
	for r.Next() {
		rec := r.RecordBatch()
		got = cellText(rec.Column(int(rec.Schema().FieldIndices("ts")[0])), 0)
	}
	return got, r.Err()
}

// Every timestamp form of a Parquet column, read as the ts column. The
// instant is 2024-01-01T12:34:56.123456789Z: GNU date 9.1,
// date -u -d '2024-01-01 12:34:56 UTC' +%s = 1704112496, plus the fraction;
// the day is 1704067200 / 86400 = 19723 days after 1970-01-01.
func TestParquetTimestampTypes(t *testing.T) {
	const inst = "2024-01-01T12:34:56.123456789Z"
	// INT96 as Impala and Spark write it: nanoseconds of the day in the
	// first 8 bytes, the Julian day in the last 4. Julian day of
	// 1970-01-01 is 2440588, so 19723 days later is 2460311; 12:34:56.123456789
	// is 45296123456789 ns into the day.
	const nanosOfDay = 45296123456789
	int96 := deprecated.Int96{uint32(nanosOfDay & 0xffffffff), uint32(nanosOfDay >> 32), 2460311}
	tests := []struct {
		name string
		node parquet.Node
		unit string
		v    parquet.Value
		want string
	}{
		{"TIMESTAMP millis UTC", parquet.Timestamp(parquet.Millisecond), "", parquet.Int64Value(1704112496123), "2024-01-01T12:34:56.123Z"},
		{"TIMESTAMP micros UTC", parquet.Timestamp(parquet.Microsecond), "", parquet.Int64Value(1704112496123456), "2024-01-01T12:34:56.123456Z"},
		{"TIMESTAMP nanos UTC", parquet.Timestamp(parquet.Nanosecond), "", parquet.Int64Value(1704112496123456789), inst},
		// Not adjusted to UTC: a wall-clock reading, taken as UTC.
		{"TIMESTAMP millis local", parquet.TimestampAdjusted(parquet.Millisecond, false), "", parquet.Int64Value(1704112496123), "2024-01-01T12:34:56.123Z"},
		{"TIMESTAMP micros local", parquet.TimestampAdjusted(parquet.Microsecond, false), "", parquet.Int64Value(1704112496123456), "2024-01-01T12:34:56.123456Z"},
		{"TIMESTAMP nanos local", parquet.TimestampAdjusted(parquet.Nanosecond, false), "", parquet.Int64Value(1704112496123456789), inst},
		{"DATE", parquet.Date(), "", parquet.Int32Value(19723), "2024-01-01T00:00:00Z"},
		// An epoch unit given for a DATE column does not change it.
		{"DATE with unit", parquet.Date(), "s", parquet.Int32Value(19723), "2024-01-01T00:00:00Z"},
		{"INT96", parquet.Leaf(parquet.Int96Type), "", parquet.Int96Value(int96), inst},
		{"INT64 s", parquet.Leaf(parquet.Int64Type), "s", parquet.Int64Value(1704112496), "2024-01-01T12:34:56Z"},
		{"INT64 ms", parquet.Int(64), "ms", parquet.Int64Value(1704112496123), "2024-01-01T12:34:56.123Z"},
		{"INT64 us", parquet.Int(64), "us", parquet.Int64Value(1704112496123456), "2024-01-01T12:34:56.123456Z"},
		{"INT64 ns", parquet.Int(64), "ns", parquet.Int64Value(1704112496123456789), inst},
		{"INT32 s", parquet.Int(32), "s", parquet.Int32Value(1704112496), "2024-01-01T12:34:56Z"},
		// 14:34:56+02:00 is 12:34:56 UTC.
		{"string RFC 3339", parquet.String(), "", parquet.ByteArrayValue([]byte("2024-01-01T14:34:56.123456789+02:00")), inst},
		{"string date time", parquet.String(), "", parquet.ByteArrayValue([]byte("2024-01-01 12:34:56.123456789")), inst},
		{"string date", parquet.String(), "", parquet.ByteArrayValue([]byte("2024-01-01")), "2024-01-01T00:00:00Z"},
		{"plain bytes", parquet.Leaf(parquet.ByteArrayType), "", parquet.ByteArrayValue([]byte("2024-01-01")), "2024-01-01T00:00:00Z"},
		{"string epoch", parquet.String(), "s", parquet.ByteArrayValue([]byte("1704112496")), "2024-01-01T12:34:56Z"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			data := oneColumn(t, tc.node, []*parquet.Value{val(tc.v), nil})
			src := BytesSource("ts.parquet", data)
			src.Partitions = []Partition{{Key: "u", Value: "unit-1"}, {Key: "e", Value: "view"}}
			m := Mapping{User: "u", TS: "c", Event: "e", EpochUnit: tc.unit}
			rows, st, err := readAll(t, []Source{src}, Options{Mapping: m, MaxBadRows: NoLimit})
			if err != nil {
				t.Fatal(err)
			}
			equalRows(t, rows, []string{"unit-1 | " + tc.want + " | view"})
			// The null in row 2 is a null timestamp.
			if len(st.BadRows) != 1 || st.BadRows[0].Reason != "null_timestamp" || st.BadRowExamples[0].Row != 2 {
				t.Errorf("bad rows %v, want one null_timestamp at row 2", st.BadRows)
			}
			// The same through the row-by-row path and the table reader.
			rows, _, err = readAll(t, []Source{src}, Options{Mapping: m, MaxBadRows: NoLimit, rowByRow: true})
			if err != nil {
				t.Fatal(err)
			}
			equalRows(t, rows, []string{"unit-1 | " + tc.want + " | view"})
			if got, err := tableTS(t, tc.node, tc.unit, tc.v); err != nil || got != tc.want {
				t.Errorf("table reader: %s, %v; want %s", got, err, tc.want)
			}
		})
	}
}

// Values a ts column can hold that are no instant armtally can represent.
func TestParquetTimestampRange(t *testing.T) {
	tests := []struct {
		name string
		node parquet.Node
		unit string
		v    parquet.Value
		err  error
		msg  string
	}{
		// 9223372037 s > 9223372036.854775807 s, the largest int64 ns.
		{"INT64 s", parquet.Int(64), "s", parquet.Int64Value(9223372037), ErrTimestampRange,
			`ts.parquet:1: row group 0: column "c": timestamp "9223372037 s" is outside the range of nanosecond timestamps (1677-09-21 to 2262-04-11)`},
		// date -u -d '2262-04-12' +%s = 9223459200 = 106752 days * 86400.
		{"DATE", parquet.Date(), "", parquet.Int32Value(106752), ErrTimestampRange,
			`ts.parquet:1: row group 0: column "c": timestamp "2262-04-12T00:00:00Z" is outside the range of nanosecond timestamps (1677-09-21 to 2262-04-11)`},
		// Julian day 2440588 + 106752 = 2547340 is 2262-04-12.
		{"INT96", parquet.Leaf(parquet.Int96Type), "", parquet.Int96Value(deprecated.Int96{0, 0, 2547340}), ErrTimestampRange,
			`ts.parquet:1: row group 0: column "c": timestamp "2262-04-12T00:00:00Z" is outside the range of nanosecond timestamps (1677-09-21 to 2262-04-11)`},
		{"TIMESTAMP millis", parquet.Timestamp(parquet.Millisecond), "", parquet.Int64Value(9223372036855), ErrTimestampRange,
			`ts.parquet:1: row group 0: column "c": timestamp "9223372036855 ms" is outside the range of nanosecond timestamps (1677-09-21 to 2262-04-11)`},
		{"string", parquet.String(), "", parquet.ByteArrayValue([]byte("2024-01-01 25:00:00")), ErrBadTimestamp,
			`ts.parquet:1: row group 0: column "c": cannot parse "2024-01-01 25:00:00" as a timestamp (want RFC 3339 or YYYY-MM-DD[ HH:MM:SS[.frac]])`},
		{"empty string", parquet.String(), "", parquet.ByteArrayValue(nil), ErrNullTimestamp,
			`ts.parquet:1: row group 0: column "c": null timestamp`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			src := BytesSource("ts.parquet", oneColumn(t, tc.node, []*parquet.Value{val(tc.v)}))
			src.Partitions = []Partition{{Key: "u", Value: "unit-1"}, {Key: "e", Value: "view"}}
			m := Mapping{User: "u", TS: "c", Event: "e", EpochUnit: tc.unit}
			for _, rowByRow := range []bool{false, true} {
				_, _, err := readAll(t, []Source{src}, Options{Mapping: m, rowByRow: rowByRow})
				if err == nil || Reason(err) != Reason(tc.err) || err.Error() != tc.msg {
					t.Errorf("row by row %v: error\n got %v\nwant %s", rowByRow, err, tc.msg)
				}
			}
			// The table reader gives the same reason and message.
			_, err := tableTS(t, tc.node, tc.unit, tc.v)
			if !errors.Is(err, tc.err) || err.Error() != tc.msg {
				t.Errorf("table reader: error\n got %v\nwant %s", err, tc.msg)
			}
		})
	}
}

// User ids of every integer kind become decimal text, the same text a CSV
// file holds for them; strings stay as written.
func TestParquetUserIDTypes(t *testing.T) {
	tests := []struct {
		name string
		node parquet.Node
		v    parquet.Value
		want string
	}{
		{"INT64", parquet.Int(64), parquet.Int64Value(9007199254740993), "9007199254740993"}, // 2^53 + 1, kept exactly
		{"INT64 min", parquet.Int(64), parquet.Int64Value(-9223372036854775808), "-9223372036854775808"},
		{"INT32", parquet.Int(32), parquet.Int32Value(-2147483648), "-2147483648"},
		{"plain INT32", parquet.Leaf(parquet.Int32Type), parquet.Int32Value(42), "42"},
		// Unsigned: the bits of -1 are 2^64 - 1 and 2^32 - 1.
		{"UINT64", parquet.Uint(64), parquet.Int64Value(-1), "18446744073709551615"},
		{"UINT32", parquet.Uint(32), parquet.Int32Value(-1), "4294967295"},
		{"string", parquet.String(), parquet.ByteArrayValue([]byte("007")), "007"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			src := BytesSource("u.parquet", oneColumn(t, tc.node, []*parquet.Value{val(tc.v)}))
			src.Partitions = []Partition{{Key: "d", Value: "2024-01-01"}, {Key: "e", Value: "view"}}
			rows, _, err := readAll(t, []Source{src}, Options{Mapping: Mapping{User: "c", TS: "d", Event: "e"}})
			if err != nil {
				t.Fatal(err)
			}
			equalRows(t, rows, []string{tc.want + " | 2024-01-01T00:00:00Z | view"})
		})
	}
	// The same id in CSV: the digits as written.
	rows, _, err := readAll(t, []Source{BytesSource("u.csv", []byte("u,d,e\n9007199254740993,2024-01-01,view\n"))},
		Options{Mapping: Mapping{User: "u", TS: "d", Event: "e"}})
	if err != nil {
		t.Fatal(err)
	}
	equalRows(t, rows, []string{"9007199254740993 | 2024-01-01T00:00:00Z | view"})
}
