package ingest

import (
	"errors"
	"math"
	"testing"
	"time"
)

// Expected seconds come from GNU coreutils 9.1 date, run as
// `date -u -d 'YYYY-MM-DD HH:MM:SS UTC' +%s` (offset forms as
// `date -u -d 'YYYY-MM-DDTHH:MM:SS+hh:mm' +%s`); the comment beside each case
// shows the command's argument and any arithmetic for the fraction.
func TestParseTimestamp(t *testing.T) {
	tests := []struct {
		in   string
		want int64 // nanoseconds
		err  error
	}{
		// date -u -d '1970-01-01 00:00:00 UTC' +%s = 0
		{in: "1970-01-01", want: 0},
		// date -u -d '2024-02-29 00:00:00 UTC' +%s = 1709164800 (leap day)
		{in: "2024-02-29", want: 1709164800 * 1e9},
		// date -u -d '2024-01-01 12:34:56 UTC' +%s = 1704112496
		{in: "2024-01-01 12:34:56", want: 1704112496 * 1e9},
		{in: "2024-01-01T12:34:56", want: 1704112496 * 1e9},
		{in: "2024-01-01t12:34:56", want: 1704112496 * 1e9},
		{in: "2024-01-01T12:34:56Z", want: 1704112496 * 1e9},
		{in: "2024-01-01T12:34:56z", want: 1704112496 * 1e9},
		{in: "2024-01-01T12:34:56+00:00", want: 1704112496 * 1e9},
		// 1704112496 s + .123456 s = 1704112496123456000 ns
		{in: "2024-01-01T12:34:56.123456", want: 1704112496123456000},
		// one fraction digit: .1 s = 100000000 ns
		{in: "2024-01-01 12:34:56.1", want: 1704112496100000000},
		// nine fraction digits
		{in: "2024-01-01 12:34:56.000000001Z", want: 1704112496000000001},
		// date -u -d '2026-03-15T10:30:00+02:00' +%s = 1773563400
		{in: "2026-03-15T10:30:00+02:00", want: 1773563400 * 1e9},
		// date -u -d '2026-03-15T10:30:00-05:30' +%s = 1773590400
		{in: "2026-03-15T10:30:00-05:30", want: 1773590400 * 1e9},
		// date -u -d '1969-12-31 23:59:59 UTC' +%s = -1; -1 s + .5 s = -500000000 ns
		{in: "1969-12-31 23:59:59.5", want: -500000000},
		// date -u -d '1900-01-01 00:00:00 UTC' +%s = -2208988800
		{in: "1900-01-01", want: -2208988800 * 1e9},
		// date -u -d '2000-03-01 00:00:00 UTC' +%s = 951868800 (2000 is a leap year)
		{in: "2000-03-01", want: 951868800 * 1e9},

		// The ends of the int64-nanosecond range, from math.MinInt64 and
		// math.MaxInt64: -9223372036.854775808 s and 9223372036.854775807 s.
		// date -u -d '1677-09-21 00:12:44 UTC' +%s = -9223372036, so
		// -9223372036.854775808 s is 1677-09-21T00:12:43.145224192Z.
		{in: "1677-09-21T00:12:43.145224192Z", want: math.MinInt64},
		{in: "1677-09-21T00:12:43.145224191Z", err: ErrTimestampRange},
		// date -u -d '2262-04-11 23:47:16 UTC' +%s = 9223372036
		{in: "2262-04-11T23:47:16.854775807Z", want: math.MaxInt64},
		{in: "2262-04-11T23:47:16.854775808Z", err: ErrTimestampRange},
		{in: "9999-12-31", err: ErrTimestampRange},
		{in: "0001-01-01", err: ErrTimestampRange},

		// Not in an accepted form (calendar rules: common practice).
		{in: "", err: ErrBadTimestamp},
		{in: "2026-13-01", err: ErrBadTimestamp},
		{in: "2026-00-10", err: ErrBadTimestamp},
		{in: "2023-02-29", err: ErrBadTimestamp}, // 2023 is not a leap year
		{in: "1900-02-29", err: ErrBadTimestamp}, // divisible by 100, not by 400
		{in: "2026-04-31", err: ErrBadTimestamp},
		{in: "2026-04-00", err: ErrBadTimestamp},
		{in: "2026-1-01", err: ErrBadTimestamp},
		{in: "26-01-01", err: ErrBadTimestamp},
		{in: "2026/01/01", err: ErrBadTimestamp},
		{in: "2026-01-01 24:00:00", err: ErrBadTimestamp},
		{in: "2026-01-01 23:60:00", err: ErrBadTimestamp},
		{in: "2026-01-01 23:59:60", err: ErrBadTimestamp}, // leap second
		{in: "2026-01-01 23:59", err: ErrBadTimestamp},
		{in: "2026-01-01 23:59:59.", err: ErrBadTimestamp},
		{in: "2026-01-01 23:59:59.1234567891", err: ErrBadTimestamp}, // 10 digits
		{in: "2026-01-01 23:59:59+0200", err: ErrBadTimestamp},
		{in: "2026-01-01 23:59:59+02", err: ErrBadTimestamp},
		{in: "2026-01-01 23:59:59+24:00", err: ErrBadTimestamp},
		{in: "2026-01-01 23:59:59 UTC", err: ErrBadTimestamp},
		{in: "2026-01-01Z", err: ErrBadTimestamp},
		{in: " 2026-01-01", err: ErrBadTimestamp},
		{in: "2026-01-01 ", err: ErrBadTimestamp},
		{in: "1704112496", err: ErrBadTimestamp},
		{in: "2026-01-01 1a:00:00", err: ErrBadTimestamp},
		{in: "+026-01-01", err: ErrBadTimestamp},
	}
	for _, tc := range tests {
		t.Run(tc.in, func(t *testing.T) {
			got, err := ParseTimestamp([]byte(tc.in))
			if tc.err != nil {
				if !errors.Is(err, tc.err) {
					t.Fatalf("ParseTimestamp(%q) = %d, %v; want error %v", tc.in, got, err, tc.err)
				}
				return
			}
			if err != nil || got != tc.want {
				t.Fatalf("ParseTimestamp(%q) = %d, %v; want %d", tc.in, got, err, tc.want)
			}
		})
	}
}

// Epoch counts in each unit. The instant is 2024-01-01T12:34:56.123456789Z:
// date -u -d '2024-01-01 12:34:56 UTC' +%s = 1704112496, plus the fraction.
func TestFromEpoch(t *testing.T) {
	tests := []struct {
		name string
		v    int64
		unit string
		want int64
		ok   bool
	}{
		{"s", 1704112496, "s", 1704112496000000000, true},
		{"ms", 1704112496123, "ms", 1704112496123000000, true},
		{"us", 1704112496123456, "us", 1704112496123456000, true},
		{"ns", 1704112496123456789, "ns", 1704112496123456789, true},
		{"negative ms", -1, "ms", -1000000, true},                          // 1969-12-31T23:59:59.999Z
		{"min ns", math.MinInt64, "ns", math.MinInt64, true},               // every int64 is a ns count
		{"s too large", 9223372037, "s", 0, false},                         // 9223372037e9 > MaxInt64 = 9223372036854775807
		{"s too small", -9223372037, "s", 0, false},                        // -9223372037e9 < MinInt64
		{"us lowest", -9223372036854775, "us", -9223372036854775000, true}, // >= MinInt64
		{"us below", -9223372036854776, "us", 0, false},                    // -9223372036854776000 < MinInt64
		{"ms highest", 9223372036854, "ms", 9223372036854000000, true},
		{"ms above", 9223372036855, "ms", 0, false}, // 9223372036855000000 > MaxInt64
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got, ok := fromEpoch(tc.v, epochUnitNanos(tc.unit))
			if ok != tc.ok || (ok && got != tc.want) {
				t.Fatalf("fromEpoch(%d, %s) = %d, %v; want %d, %v", tc.v, tc.unit, got, ok, tc.want, tc.ok)
			}
		})
	}
}

func TestFromDate(t *testing.T) {
	// date -u -d '2024-02-29 00:00:00 UTC' +%s = 1709164800 = 19782 days * 86400
	if got, ok := fromDate(19782); !ok || got != 1709164800*1e9 {
		t.Errorf("fromDate(19782) = %d, %v; want %d", got, ok, int64(1709164800*1e9))
	}
	// 106752 days * 86400 s = 9223372800 s > 9223372036 s (2262-04-11)
	if _, ok := fromDate(106752); ok {
		t.Error("fromDate(106752) accepted a date after 2262-04-11")
	}
}

// FuzzParseTimestamp checks two properties. It never panics. Anything it
// accepts survives a round trip: formatting the result as RFC 3339 with
// nanoseconds, or as YYYY-MM-DD HH:MM:SS.frac, and parsing that again gives
// the same instant; and where
// Go's time.Parse also accepts the input as RFC 3339, both agree.
func FuzzParseTimestamp(f *testing.F) {
	// Seeds: testdata/fuzz/FuzzParseTimestamp, which go test runs too.
	f.Fuzz(func(t *testing.T, s string) {
		ns, err := parseTimestamp(s)
		if err != nil {
			if !errors.Is(err, ErrBadTimestamp) && !errors.Is(err, ErrTimestampRange) {
				t.Fatalf("parseTimestamp(%q): unexpected error %v", s, err)
			}
			return
		}
		text := formatTimestamp(ns)
		again, err := parseTimestamp(text)
		if err != nil || again != ns {
			t.Fatalf("parseTimestamp(%q) = %d, formatted %q, parsed again = %d, %v", s, ns, text, again, err)
		}
		// The other accepted form, without an offset (UTC).
		plain := time.Unix(0, ns).UTC().Format("2006-01-02 15:04:05.999999999")
		if again, err := parseTimestamp(plain); err != nil || again != ns {
			t.Fatalf("parseTimestamp(%q) = %d, formatted %q, parsed again = %d, %v", s, ns, plain, again, err)
		}
		if tm, err := time.Parse(time.RFC3339Nano, s); err == nil && tm.UnixNano() != ns {
			t.Fatalf("parseTimestamp(%q) = %d; time.Parse gives %d", s, ns, tm.UnixNano())
		}
	})
}

// Text timestamps with an epoch unit set: integers are epoch counts,
// everything else goes to ParseTimestamp, and no row allocates.
func TestParseTSTextEpoch(t *testing.T) {
	p := &plan{epochUnit: epochUnitNanos("s")}
	tests := []struct {
		in   string
		want int64
		err  error
	}{
		{"1704112496", 1704112496e9, nil}, // date -u -d @1704112496 = 2024-01-01 12:34:56 UTC
		{"-1", -1e9, nil},
		{"+1", 1e9, nil},
		{"2024-01-01 12:34:56", 1704112496e9, nil},
		{"9223372037", 0, ErrTimestampRange},         // 9223372037 s > MaxInt64 ns
		{"99999999999999999999", 0, ErrBadTimestamp}, // beyond int64: not a count, not a date
		{"-", 0, ErrBadTimestamp},
		{"", 0, ErrNullTimestamp},
	}
	for _, tc := range tests {
		got, err := p.parseTSText(tc.in)
		if err != tc.err || (err == nil && got != tc.want) {
			t.Errorf("parseTSText(%q) = %d, %v; want %d, %v", tc.in, got, err, tc.want, tc.err)
		}
	}
	if n := testing.AllocsPerRun(100, func() { p.parseTSText("2024-01-01T12:34:56Z") }); n != 0 {
		t.Errorf("%v allocations per text timestamp with an epoch unit, want 0", n)
	}
}
