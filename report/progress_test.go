package report

import (
	"testing"
	"time"
)

func TestFormatRate(t *testing.T) {
	for _, tc := range []struct {
		v    float64
		want string
	}{
		{0, "0"},
		{-5, "0"},
		{0.4, "0"},
		{950, "950"},
		{999.4, "999"},
		{999.5, "1.00k"}, // would be "1000" without a prefix
		{1234, "1.23k"},
		{9994, "9.99k"},
		{9996, "10.0k"},
		{12345, "12.3k"},
		{99960, "100k"},
		{123456, "123k"},
		{999600, "1.00M"},
		{12_345_678, "12.3M"},
		{4_560_000_000, "4.56G"},
		{7.1e12, "7.10T"},
		{5e15, "5000T"}, // no prefix above T
	} {
		if got := formatRate(tc.v); got != tc.want {
			t.Errorf("formatRate(%v) = %q, want %q", tc.v, got, tc.want)
		}
	}
}

func TestFormatElapsed(t *testing.T) {
	for _, tc := range []struct {
		d    time.Duration
		want string
	}{
		{-time.Second, "0s"},
		{0, "0s"},
		{999 * time.Millisecond, "0s"}, // rounded down
		{7 * time.Second, "7s"},
		{59*time.Second + 900*time.Millisecond, "59s"},
		{62 * time.Second, "1m02s"},
		{59*time.Minute + 59*time.Second, "59m59s"},
		{time.Hour + 2*time.Minute + 3*time.Second, "1h02m03s"},
		{100 * time.Hour, "100h00m00s"},
	} {
		if got := formatElapsed(tc.d); got != tc.want {
			t.Errorf("formatElapsed(%v) = %q, want %q", tc.d, got, tc.want)
		}
	}
}

func TestProgressLine(t *testing.T) {
	for _, tc := range []struct {
		rows    int64
		elapsed time.Duration
		want    string
	}{
		{0, 0, "reading: 0 rows, 0 rows/s, 0s"},
		{500, 0, "reading: 500 rows, 0 rows/s, 0s"}, // no rate before any time has passed
		{12_345_678, time.Second, "reading: 12,345,678 rows, 12.3M rows/s, 1s"},
		{1_000_000, 4 * time.Second, "reading: 1,000,000 rows, 250k rows/s, 4s"},
		{3_000_000, 62 * time.Second, "reading: 3,000,000 rows, 48.4k rows/s, 1m02s"}, // 3e6/62 = 48387
	} {
		if got := ProgressLine(tc.rows, tc.elapsed); got != tc.want {
			t.Errorf("ProgressLine(%d, %v) = %q, want %q", tc.rows, tc.elapsed, got, tc.want)
		}
	}
}
