package report

import (
	"fmt"
	"strconv"
	"time"
)

// ProgressLine is the text of a progress line after elapsed with rows
// read, as the command shows it on a terminal while it reads: "reading: 12,345,678 rows, 12.3M rows/s, 1m02s".
func ProgressLine(rows int64, elapsed time.Duration) string {
	rate := 0.0
	if elapsed > 0 {
		rate = float64(rows) / elapsed.Seconds()
	}
	return "reading: " + FormatCount(rows) + " rows, " + formatRate(rate) + " rows/s, " + formatElapsed(elapsed)
}

// formatRate writes a rate per second with three significant digits and an
// SI prefix (k, M, G, T) from 1000 up: 950, 12.3k, 4.56M. A rate that is
// not a positive number is "0".
func formatRate(v float64) string {
	if !(v > 0) {
		return "0"
	}
	const prefixes = " kMGT"
	i := 0
	// 999.5 and up would round to "1000" with the current prefix.
	for v >= 999.5 && i < len(prefixes)-1 {
		v /= 1000
		i++
	}
	if i == 0 {
		return strconv.FormatFloat(v, 'f', 0, 64)
	}
	digits := 0
	switch {
	case v < 9.995:
		digits = 2
	case v < 99.95:
		digits = 1
	}
	return strconv.FormatFloat(v, 'f', digits, 64) + string(prefixes[i])
}

// formatElapsed writes d in whole seconds (rounded down): "7s", "1m02s",
// "1h02m03s". A negative d is "0s".
func formatElapsed(d time.Duration) string {
	s := int64(max(d, 0) / time.Second)
	h, m := s/3600, s/60%60
	s %= 60
	switch {
	case h > 0:
		return fmt.Sprintf("%dh%02dm%02ds", h, m, s)
	case m > 0:
		return fmt.Sprintf("%dm%02ds", m, s)
	}
	return fmt.Sprintf("%ds", s)
}
