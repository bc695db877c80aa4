package ingest

import (
	"encoding/csv"
	"errors"
	"strings"
	"testing"
)

// FuzzCSVReader reads arbitrary bytes as a CSV source, once without an error
// budget and once with no limit, with the delimiter picked by sep. The
// properties: it never panics or hangs (each input must finish within 10 s);
// every error names the file and is a *RowError, a *ColumnError, a
// *csv.ParseError or the empty-file error; without an error (and with the
// budget) every row read is either delivered or counted as bad; the
// parallel path gives the same rows, counts and errors as one encoding/csv
// reader; and no
// Arrow buffer is left allocated (readAll's checked allocator).
func FuzzCSVReader(f *testing.F) {
	// Seeds: testdata/fuzz/FuzzCSVReader, which go test runs too.
	f.Fuzz(func(t *testing.T, data []byte, sep byte) {
		delim := []rune{',', ';', '\t', '|'}[int(sep)%4]
		m := DefaultMapping()
		m.Segments = []string{"country"}
		m.EpochUnit = []string{"", "s", "ms"}[int(sep/4)%3]
		for _, budget := range []int64{0, NoLimit} {
			var st Stats
			var err error
			within(t, "fuzz input", func() {
				_, st, err = readAll(t, []Source{BytesSource("f.csv", data)},
					Options{Mapping: m, ExposureEvent: "exposure", Delimiter: delim, MaxBadRows: budget, BatchSize: 7})
			})
			if err != nil {
				checkFuzzError(t, err)
				continue
			}
			var bad int64
			for _, rc := range st.BadRows {
				bad += rc.Count
			}
			if st.RowsRead != st.Rows+bad {
				t.Fatalf("budget %d: %d rows read, %d delivered, %d bad", budget, st.RowsRead, st.Rows, bad)
			}
			if budget == 0 && bad != 0 {
				t.Fatalf("strict read ended cleanly with %d bad rows", bad)
			}
		}
		// The parallel path agrees with one encoding/csv reader.
		compareCSVPathsWith(t, "f.csv", data, Options{Mapping: m, ExposureEvent: "exposure", Delimiter: delim, MaxBadRows: NoLimit, BatchSize: 7},
			[]int{3}, []int{1, 13})
	})
}

func checkFuzzError(t *testing.T, err error) {
	t.Helper()
	if !strings.HasPrefix(err.Error(), "f.csv:") {
		t.Fatalf("error does not name the file: %v", err)
	}
	var re *RowError
	var ce *ColumnError
	var pe *csv.ParseError
	switch {
	case errors.As(err, &re):
		if re.File != "f.csv" || re.Row < 2 || Reason(re) == "" {
			t.Fatalf("row error %+v: want file f.csv, a line after the header, a reason", *re)
		}
	case errors.As(err, &ce):
	case errors.As(err, &pe):
	case err.Error() == "f.csv: empty file: want a header row":
	default:
		t.Fatalf("unexpected error %T: %v", err, err)
	}
}
