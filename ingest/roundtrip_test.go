package ingest

import (
	"bytes"
	"errors"
	"testing"
	"time"

	"github.com/parquet-go/parquet-go"
)

func writeParquet[T any](t testing.TB, rows []T, opts ...parquet.WriterOption) []byte {
	t.Helper()
	var buf bytes.Buffer
	w := parquet.NewGenericWriter[T](&buf, opts...)
	if _, err := w.Write(rows); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

// A file written here with parquet-go: string user, TIMESTAMP(MICROS) ts,
// dictionary-encoded event and arm (arm optional), two rows per row group.
func TestParquetRoundTrip(t *testing.T) {
	type event struct {
		User  string    `parquet:"user_id"`
		TS    time.Time `parquet:"ts,timestamp(microsecond)"`
		Event string    `parquet:"event,dict"`
		Arm   *string   `parquet:"arm,optional,dict"`
	}
	control, treatment := "control", "treatment"
	// The instants are written by the test itself; the expected text is
	// the same instant in RFC 3339 (microseconds kept, time zone dropped).
	at := func(s string) time.Time {
		tm, err := time.Parse(time.RFC3339Nano, s)
		if err != nil {
			t.Fatal(err)
		}
		return tm
	}
	rows := []event{
		{"u1", at("2026-03-15T08:30:00.123456Z"), "exposure", &control},
		{"u2", at("2026-03-15T10:30:00+02:00"), "exposure", &treatment},
		{"u1", at("2026-03-16T00:00:00Z"), "purchase", nil},
		{"u3", at("1969-12-31T23:59:59.5Z"), "view", nil},
		{"u2", at("2026-03-17T12:00:00Z"), "purchase", nil},
	}
	data := writeParquet(t, rows, parquet.MaxRowsPerRowGroup(2))
	m := Mapping{User: "user_id", TS: "ts", Event: "event", Arm: "arm"}
	got, st, err := readAll(t, []Source{BytesSource("events.parquet", data)}, Options{Mapping: m, ExposureEvent: "exposure", BatchSize: 4})
	if err != nil {
		t.Fatal(err)
	}
	equalRows(t, got, []string{
		"u1 | 2026-03-15T08:30:00.123456Z | exposure | control",
		"u2 | 2026-03-15T08:30:00Z | exposure | treatment",
		"u1 | 2026-03-16T00:00:00Z | purchase | ∅",
		"u3 | 1969-12-31T23:59:59.5Z | view | ∅",
		"u2 | 2026-03-17T12:00:00Z | purchase | ∅",
	})
	if st.RowsRead != 5 || st.Rows != 5 {
		t.Errorf("stats %+v, want 5 rows", st)
	}

	// An exposure without an arm in the third row group: row 5 of the
	// file, row group 2.
	rows[4] = event{"u4", at("2026-03-17T12:00:00Z"), "exposure", nil}
	data = writeParquet(t, rows, parquet.MaxRowsPerRowGroup(2))
	_, _, err = readAll(t, []Source{BytesSource("events.parquet", data)}, Options{Mapping: m, ExposureEvent: "exposure"})
	var re *RowError
	if !errors.As(err, &re) || !errors.Is(err, ErrNoArm) {
		t.Fatalf("error %v, want *RowError with ErrNoArm", err)
	}
	if want := `events.parquet:5: row group 2: column "arm": exposure row without an arm`; err.Error() != want {
		t.Errorf("message\n got %s\nwant %s", err, want)
	}
}

// Integer user ids are written in decimal; a plain INT64 ts is read in the
// mapping's epoch unit, and without one it is an error asking for it.
func TestParquetIntegerColumns(t *testing.T) {
	type event struct {
		UID   int64  `parquet:"uid"`
		TSMS  int64  `parquet:"ts_ms"`
		Event string `parquet:"event"`
	}
	// date -u -d '2024-01-01 12:34:56 UTC' +%s = 1704112496 (GNU date 9.1)
	data := writeParquet(t, []event{
		{UID: 9007199254740993, TSMS: 1704112496123, Event: "view"}, // 2^53 + 1: kept exactly
		{UID: -7, TSMS: -1, Event: "view"},
	})
	src := []Source{BytesSource("ints.parquet", data)}
	m := Mapping{User: "uid", TS: "ts_ms", Event: "event", EpochUnit: "ms"}
	got, _, err := readAll(t, src, Options{Mapping: m})
	if err != nil {
		t.Fatal(err)
	}
	equalRows(t, got, []string{
		"9007199254740993 | 2024-01-01T12:34:56.123Z | view",
		"-7 | 1969-12-31T23:59:59.999Z | view",
	})

	m.EpochUnit = ""
	_, _, err = readAll(t, src, Options{Mapping: m})
	want := `ints.parquet: column "ts_ms": unsupported column type (integer timestamps need an epoch unit (s, ms, us or ns))`
	if !errors.Is(err, ErrColumnType) || err.Error() != want {
		t.Errorf("error %v, want %s", err, want)
	}

	m.EpochUnit, m.Segments = "ms", []string{"country"}
	_, _, err = readAll(t, src, Options{Mapping: m})
	want = `ints.parquet: column "country": missing column (the file has: uid, ts_ms, event)`
	if !errors.Is(err, ErrMissingColumn) || err.Error() != want {
		t.Errorf("error %v, want %s", err, want)
	}
}
