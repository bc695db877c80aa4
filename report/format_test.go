package report

import (
	"testing"
	"time"
)

// The expected strings below are worked by hand from the rules in
// format.go; the arithmetic is beside each case where it is not obvious.

func TestFormatNumbers(t *testing.T) {
	tests := []struct {
		name string
		got  string
		want string
	}{
		{"count zero", FormatCount(0), "0"},
		{"count below a thousand", FormatCount(999), "999"},
		{"count thousands", FormatCount(1000), "1,000"},
		{"count millions", FormatCount(1482913), "1,482,913"},
		{"count negative", FormatCount(-1234567), "-1,234,567"},
		{"count five digits", FormatCount(12345), "12,345"},
		{"count six digits", FormatCount(123456), "123,456"},
		{"count largest", FormatCount(9223372036854775807), "9,223,372,036,854,775,807"}, // math.MaxInt64
		// 0.12204 * 100 = 12.204: two decimals
		{"percent", formatPercent(0.12204081632653062), "12.20%"},
		{"percent zero", formatPercent(0), "0.00%"},
		{"percent one", formatPercent(1), "100.00%"},
		// 0.00342 * 100 = 0.342 >= 0.1: two decimals
		{"percent small", formatPercent(0.00342), "0.34%"},
		// 0.000342 * 100 = 0.0342: two decimals all the same
		{"percent smaller", formatPercent(0.000342), "0.03%"},
		// 3e-9 * 100 = 3e-7 rounds to zero at two decimals
		{"percent tiny", formatPercent(3e-9), "0.00%"},
		{"points positive", formatPoints(0.012040816326530618), "+1.20"},
		{"points negative", formatPoints(-0.0067260784215218763), "-0.67"},
		// -6.89e-5 * 100 = -0.00689: two decimals give -0.01
		{"points tiny negative", formatPoints(-6.8938900617693429e-05), "-0.01"},
		{"pp", formatPP(0.0122), "+1.22 pp"},
		{"pp range", formatPPRange(-0.0016, 0.0115), "-0.16 to +1.15 pp"},
		{"expected count", formatExpected(1234.5), "1,234.50"},
		{"expected count small", formatExpected(0.3), "0.30"},
		{"points zero", formatPoints(0), "0.00"},
		// -1e-12 rounds to zero at two decimals: no sign
		{"points negative zero", formatPoints(-1e-12), "0.00"},
		{"lift tiny", formatSignedPercent(-0.000042), "0.00%"},
		{"lift", formatSignedPercent(0.10946196660482377), "+10.95%"},
		{"lift negative", formatSignedPercent(-0.032586776355572278), "-3.26%"},
		{"level 95", formatLevel(0.95), "95%"},
		{"level 99.9", formatLevel(0.999), "99.9%"},
		{"level 90", formatLevel(0.9), "90%"},
		{"alpha", formatAlpha(0.05), "0.05"},
		{"threshold", formatAlpha(0.001), "0.001"},
		{"statistic", formatStatistic(2.6388508135648991), "2.64"},
		{"statistic negative zero", formatStatistic(-0.001), "0.00"},
		{"p-value", formatPValue(0.008318758012105033), "0.0083"},
		{"p-value one", formatPValue(1), "1.0000"},
		{"p-value at floor", formatPValue(0.0001), "0.0001"},
		{"p-value below floor", formatPValue(0.0000999), "< 0.0001"},
		{"p-value zero", formatPValue(0), "< 0.0001"},
		{"p is", pIs(0.008318758012105033), "p = 0.0083"},
		{"p is below floor", pIs(1e-40), "p < 0.0001"},
		{"duration days", formatDuration(7 * 86400), "7 days"},
		{"duration one day", formatDuration(86400), "1 day"},
		{"duration hours", formatDuration(36 * 3600), "36 hours"},
		{"duration minutes", formatDuration(90 * 60), "90 minutes"},
		{"duration seconds", formatDuration(45), "45 seconds"},
		{"reason", formatReason("bad_timestamp"), "bad timestamp"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if tc.got != tc.want {
				t.Errorf("got %q, want %q", tc.got, tc.want)
			}
		})
	}
}

func TestFormatTime(t *testing.T) {
	tests := []struct {
		name string
		in   string
		want string
	}{
		{"utc", "2026-03-02T00:00:00Z", "2026-03-02 00:00:00 UTC"},
		// 07:12:45.25 at +01:00 is 06:12:45.25 UTC
		{"offset and fraction", "2026-03-16T07:12:45.25+01:00", "2026-03-16 06:12:45.25 UTC"},
		{"nanoseconds", "2026-03-16T00:00:00.000000001Z", "2026-03-16 00:00:00.000000001 UTC"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			tm, err := time.Parse(time.RFC3339Nano, tc.in)
			if err != nil {
				t.Fatal(err)
			}
			if got := formatTime(tm); got != tc.want {
				t.Errorf("formatTime(%s) = %q, want %q", tc.in, got, tc.want)
			}
		})
	}
}

func TestDecisionRoutes(t *testing.T) {
	tests := []struct {
		name string
		got  string
		want string
	}{
		{"p below alpha", pAgainst(0.008318758012105033, 0.05), "p = 0.0083 ≤ 0.05"},
		{"p above alpha", pAgainst(0.43855779546022788, 0.05), "p = 0.4386 > 0.05"},
		{"p equal to alpha", pAgainst(0.05, 0.05), "p = 0.0500 ≤ 0.05"},
		// 0.050004 prints as 0.0500 at four decimals, which would read as
		// <= 0.05: five decimals show 0.05000, six 0.050004.
		{"p just above alpha", pAgainst(0.050004, 0.05), "p = 0.050004 > 0.05"},
		// 0.0499996 prints as 0.0500 at four decimals: seven are needed.
		{"p just below alpha", pAgainst(0.0499996, 0.05), "p = 0.0499996 ≤ 0.05"},
		{"p below floor", pAgainst(1e-12, 0.05), "p < 0.0001 ≤ 0.05"},
		// with alpha below the floor the floor says nothing: 2 significant digits
		{"p below floor and tiny alpha", pAgainst(3.2e-6, 0.00001), "p = 3.2e-06 ≤ 0.00001"},
		{"strict below", pAgainstStrict(0.00065486524188170707, 0.001), "p = 0.0007 < 0.001"},
		{"strict above", pAgainstStrict(0.38177604076944532, 0.001), "p = 0.3818 ≥ 0.001"},
		{"strict equal", pAgainstStrict(0.001, 0.001), "p = 0.0010 ≥ 0.001"},
		{"two-sided reject", statAgainst(2.6388508135648991, 1.9599639845400536, "two-sided"), "|z| = 2.64 ≥ 1.96"},
		{"two-sided negative z", statAgainst(-2.6388508135648991, 1.9599639845400536, "two-sided"), "|z| = 2.64 ≥ 1.96"},
		{"two-sided keep", statAgainst(0.77463089580128708, 1.9599639845400536, "two-sided"), "|z| = 0.77 < 1.96"},
		// 1.9599 against 1.959964: 1.96 and 1.96 at two and three
		// decimals (1.960), 1.9599 < 1.9600 at four.
		{"two-sided blurred", statAgainst(1.9599, 1.9599639845400536, "two-sided"), "|z| = 1.9599 < 1.9600"},
		{"greater reject", statAgainst(1.8, 1.6448536269514722, "greater"), "z = 1.80 ≥ 1.64"},
		{"greater keep", statAgainst(-1.8, 1.6448536269514722, "greater"), "z = -1.80 < 1.64"},
		{"less reject", statAgainst(-1.8, 1.6448536269514722, "less"), "z = -1.80 ≤ -1.64"},
		// a critical value stored as negative for less reads the same
		{"less negative critical", statAgainst(-1.8, -1.6448536269514722, "less"), "z = -1.80 ≤ -1.64"},
		{"less keep", statAgainst(1.8, 1.6448536269514722, "less"), "z = 1.80 > -1.64"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if tc.got != tc.want {
				t.Errorf("got %q, want %q", tc.got, tc.want)
			}
		})
	}
}

func TestCode(t *testing.T) {
	tests := []struct {
		in, want string
	}{
		{"control", "`control`"},
		{"", "(empty)"},
		{"a`b", "``a`b``"},
		{"`edge", "`` `edge ``"},
		{"two\nlines", "`two lines`"},
	}
	for _, tc := range tests {
		t.Run(tc.in, func(t *testing.T) {
			if got := code(tc.in); got != tc.want {
				t.Errorf("code(%q) = %q, want %q", tc.in, got, tc.want)
			}
		})
	}
}
