package ingest

import (
	"math"
	"time"
)

// Timestamps in the logical table are int64 nanoseconds since the Unix epoch,
// UTC. Every source form (text, epoch integers, Parquet TIMESTAMP, DATE and
// INT96) is converted to seconds plus a nanosecond remainder first and then
// checked against the int64 range in one place, fromSecNsec, so no conversion
// can wrap silently.

const (
	nsPerSec  = int64(time.Second)
	secPerDay = int64(24 * 60 * 60)
	nsPerDay  = secPerDay * nsPerSec

	// julianDayUnixEpoch is the Julian day number of 1970-01-01, the day
	// origin of INT96 timestamps as Impala and Spark write them.
	julianDayUnixEpoch = 2440588
)

// fromSecNsec returns sec*1e9 + nsec, with 0 <= nsec < 1e9, or false when the
// result does not fit in an int64 (before 1677-09-21T00:12:43.145224192Z or
// after 2262-04-11T23:47:16.854775807Z).
func fromSecNsec(sec, nsec int64) (int64, bool) {
	if sec >= 0 {
		if sec > math.MaxInt64/nsPerSec {
			return 0, false
		}
		p := sec * nsPerSec
		if p > math.MaxInt64-nsec {
			return 0, false
		}
		return p + nsec, true
	}
	// Negative: write the value as (sec+1)*1e9 + (nsec-1e9) so that the
	// product cannot overflow when the sum is still in range.
	s1 := sec + 1
	if s1 < math.MinInt64/nsPerSec {
		return 0, false
	}
	p := s1 * nsPerSec
	d := nsec - nsPerSec // in [-1e9, -1]
	if p < math.MinInt64-d {
		return 0, false
	}
	return p + d, true
}

// floorDivMod returns q, r with a = q*b + r and 0 <= r < b, for b > 0.
func floorDivMod(a, b int64) (q, r int64) {
	q, r = a/b, a%b
	if r < 0 {
		q--
		r += b
	}
	return q, r
}

// epochUnitNanos returns the length of one epoch unit in nanoseconds, or 0
// for an unknown unit.
func epochUnitNanos(unit string) int64 {
	switch unit {
	case "s":
		return nsPerSec
	case "ms":
		return int64(time.Millisecond)
	case "us":
		return int64(time.Microsecond)
	case "ns":
		return 1
	}
	return 0
}

// fromEpoch converts v units of unitNanos nanoseconds since the Unix epoch.
func fromEpoch(v, unitNanos int64) (int64, bool) {
	if unitNanos == 1 {
		return v, true
	}
	perSec := nsPerSec / unitNanos
	sec, rem := floorDivMod(v, perSec)
	return fromSecNsec(sec, rem*unitNanos)
}

// fromDate converts a Parquet DATE (days since 1970-01-01) to midnight UTC.
func fromDate(days int32) (int64, bool) {
	return fromSecNsec(int64(days)*secPerDay, 0)
}

// int96SecNsec splits an INT96 timestamp as Impala and Spark write it: the
// first 8 bytes (little endian) are the nanoseconds within the day and the
// last 4 the Julian day number. parquet-go hands the 12 bytes over as three
// little-endian uint32 words.
func int96SecNsec(w [3]uint32) (sec, nsec int64) {
	nanosOfDay := int64(uint64(w[1])<<32 | uint64(w[0])) // may be negative in a corrupt file
	days := int64(int32(w[2])) - julianDayUnixEpoch
	q, r := floorDivMod(nanosOfDay, nsPerSec)
	return days*secPerDay + q, r
}

// ParseTimestamp parses a timestamp written as text and returns nanoseconds
// since the Unix epoch, UTC. The accepted forms are
//
//	YYYY-MM-DD                                 midnight UTC
//	YYYY-MM-DD HH:MM:SS[.frac][offset]        'T' or 't' may replace the space
//
// where frac has 1 to 9 digits and offset is Z, z, +HH:MM or -HH:MM; without
// an offset the time is UTC. This covers RFC 3339 date-times (which always
// carry an offset). Fields are range checked (month 1-12, the day within the
// month, hour 0-23, minute and second 0-59: leap seconds are not accepted).
//
// The error is ErrBadTimestamp when s is not in one of these forms and
// ErrTimestampRange when it is but falls outside the years that int64
// nanoseconds can hold (1677-09-21 to 2262-04-11). Surrounding spaces are not
// trimmed.
func ParseTimestamp(s []byte) (int64, error) { return parseTimestamp(s) }

func parseTimestamp[T string | []byte](s T) (int64, error) {
	sec, nsec, ok := parseTimestampParts(s)
	if !ok {
		return 0, ErrBadTimestamp
	}
	ns, ok := fromSecNsec(sec, nsec)
	if !ok {
		return 0, ErrTimestampRange
	}
	return ns, nil
}

// parseTimestampParts parses s into seconds since the epoch and a nanosecond
// remainder. It never overflows: years are four digits.
func parseTimestampParts[T string | []byte](s T) (sec, nsec int64, ok bool) {
	if len(s) < 10 || s[4] != '-' || s[7] != '-' {
		return 0, 0, false
	}
	year, ok1 := digits(s[0:4])
	month, ok2 := digits(s[5:7])
	day, ok3 := digits(s[8:10])
	if !ok1 || !ok2 || !ok3 || month < 1 || month > 12 || day < 1 || day > daysIn(year, month) {
		return 0, 0, false
	}
	days := daysFromCivil(year, month, day)
	if len(s) == 10 {
		return days * secPerDay, 0, true
	}
	// Time of day: [T t ]HH:MM:SS
	t := s[10:]
	if len(t) < 9 || (t[0] != ' ' && t[0] != 'T' && t[0] != 't') || t[3] != ':' || t[6] != ':' {
		return 0, 0, false
	}
	hour, ok1 := digits(t[1:3])
	minute, ok2 := digits(t[4:6])
	second, ok3 := digits(t[7:9])
	if !ok1 || !ok2 || !ok3 || hour > 23 || minute > 59 || second > 59 {
		return 0, 0, false
	}
	t = t[9:]
	// Fraction: .d{1,9}
	if len(t) > 0 && t[0] == '.' {
		n := 1
		for n < len(t) && t[n] >= '0' && t[n] <= '9' {
			n++
		}
		nd := n - 1
		if nd < 1 || nd > 9 {
			return 0, 0, false
		}
		f, _ := digits(t[1:n])
		for i := nd; i < 9; i++ {
			f *= 10
		}
		nsec = f
		t = t[n:]
	}
	// Offset: Z, z, +HH:MM, -HH:MM
	var offset int64
	switch {
	case len(t) == 0:
	case len(t) == 1 && (t[0] == 'Z' || t[0] == 'z'):
	case len(t) == 6 && (t[0] == '+' || t[0] == '-') && t[3] == ':':
		oh, ok1 := digits(t[1:3])
		om, ok2 := digits(t[4:6])
		if !ok1 || !ok2 || oh > 23 || om > 59 {
			return 0, 0, false
		}
		offset = oh*3600 + om*60
		if t[0] == '-' {
			offset = -offset
		}
	default:
		return 0, 0, false
	}
	sec = days*secPerDay + hour*3600 + minute*60 + second - offset
	return sec, nsec, true
}

// digits parses b as an unsigned decimal number of at most 18 digits.
func digits[T string | []byte](b T) (int64, bool) {
	if len(b) == 0 || len(b) > 18 {
		return 0, false
	}
	var v int64
	for i := 0; i < len(b); i++ {
		c := b[i]
		if c < '0' || c > '9' {
			return 0, false
		}
		v = v*10 + int64(c-'0')
	}
	return v, true
}

func isLeap(y int64) bool { return y%4 == 0 && (y%100 != 0 || y%400 == 0) }

func daysIn(year, month int64) int64 {
	switch month {
	case 2:
		if isLeap(year) {
			return 29
		}
		return 28
	case 4, 6, 9, 11:
		return 30
	}
	return 31
}

// daysFromCivil returns the number of days from 1970-01-01 to the given
// proleptic Gregorian date (H. Hinnant, "chrono-Compatible Low-Level Date
// Algorithms", days_from_civil).
func daysFromCivil(y, m, d int64) int64 {
	if m <= 2 {
		y--
	}
	era := y / 400
	if y < 0 && y%400 != 0 {
		era--
	}
	yoe := y - era*400 // [0, 399]
	mp := (m + 9) % 12 // March = 0
	doy := (153*mp+2)/5 + d - 1
	doe := yoe*365 + yoe/4 - yoe/100 + doy
	return era*146097 + doe - 719468
}

// formatTimestamp writes ns as RFC 3339 with nanoseconds, UTC.
func formatTimestamp(ns int64) string {
	return time.Unix(0, ns).UTC().Format(time.RFC3339Nano)
}

// formatSecNsec writes sec, nsec as RFC 3339 with nanoseconds, UTC, also for
// instants outside the int64-nanosecond range (for error messages).
func formatSecNsec(sec, nsec int64) string {
	return time.Unix(sec, nsec).UTC().Format(time.RFC3339Nano)
}
