package report

import (
	"math"
	"strconv"
	"strings"
	"time"
)

// This file is the one place where numbers become text in the Markdown
// readout. The JSON output never passes through here: it keeps every float
// at full precision.

// pFloor is the smallest p-value printed as a number; anything smaller is
// printed as "< 0.0001".
const pFloor = 0.0001

// numberDecimals is the decimals of every percent, percentage point,
// lift and statistic in the readout (see the README, "How numbers are
// written"). A decision route prints more only when two would blur which
// side of its threshold a value is on.
const numberDecimals = 2

// FormatCount prints a count with comma thousands separators: 1234567 is
// "1,234,567". The command's progress line uses it too.
func FormatCount(n int64) string {
	s := strconv.FormatInt(n, 10)
	neg := strings.HasPrefix(s, "-")
	if neg {
		s = s[1:]
	}
	var b strings.Builder
	if neg {
		b.WriteByte('-')
	}
	for i, c := range s {
		if i > 0 && (len(s)-i)%3 == 0 {
			b.WriteByte(',')
		}
		b.WriteRune(c)
	}
	return b.String()
}

// fixed prints v with d decimals and drops the sign of a value that rounds
// to zero, so that no "-0.00" appears.
func fixed(v float64, d int) string {
	s := strconv.FormatFloat(v, 'f', d, 64)
	if strings.HasPrefix(s, "-") && strings.Trim(s, "-0.") == "" {
		s = s[1:]
	}
	return s
}

// signed is fixed with an explicit "+" on positive values.
func signed(v float64, d int) string {
	s := fixed(v, d)
	if !strings.HasPrefix(s, "-") && strings.Trim(s, "0.") != "" {
		s = "+" + s
	}
	return s
}

// formatPercent prints a rate or share as a percentage with two decimals:
// 0.12234 is "12.23%", 0.000342 is "0.03%".
func formatPercent(p float64) string {
	return fixed(p*100, numberDecimals) + "%"
}

// formatSignedPercent prints a relative change as a signed percentage
// with two decimals: 0.1108 is "+11.08%".
func formatSignedPercent(p float64) string {
	return signed(p*100, numberDecimals) + "%"
}

// formatPoints prints a difference of proportions in percentage points,
// signed, with two decimals, without the unit: 0.0122 is "+1.22".
func formatPoints(d float64) string {
	return signed(d*100, numberDecimals)
}

// formatPP is formatPoints with the unit: 0.0122 is "+1.22 pp".
func formatPP(d float64) string {
	return formatPoints(d) + " pp"
}

// formatPPRange prints an interval of a difference in percentage points:
// "+0.45 to +2.58 pp".
func formatPPRange(lower, upper float64) string {
	return formatPoints(lower) + " to " + formatPP(upper)
}

// formatExpected prints an expected count (n p0) with two decimals and
// thousands separators: 1234.5 is "1,234.50".
func formatExpected(x float64) string {
	s := fixed(x, numberDecimals)
	whole, frac, _ := strings.Cut(s, ".")
	n, err := strconv.ParseInt(whole, 10, 64)
	if err != nil {
		return s
	}
	w := FormatCount(n)
	if n == 0 && strings.HasPrefix(whole, "-") {
		w = "-0"
	}
	return w + "." + frac
}

// formatLevel prints a confidence level as a percentage with no trailing
// zeros: 0.95 is "95%", 0.999 is "99.9%".
func formatLevel(level float64) string {
	return strconv.FormatFloat(round(level*100, 6), 'f', -1, 64) + "%"
}

// formatAlpha prints a significance level or threshold as given, with the
// shortest decimal that round-trips: 0.05 is "0.05".
func formatAlpha(a float64) string {
	return strconv.FormatFloat(a, 'f', -1, 64)
}

// formatShare prints a planned or observed share of units as a percentage:
// 0.50123 is "50.12%".
func formatShare(s float64) string {
	return formatPercent(s)
}

// formatStatistic prints a test statistic with two decimals.
func formatStatistic(x float64) string {
	return fixed(x, numberDecimals)
}

// formatPValue prints a p-value with four decimals, or "< 0.0001" below the
// floor.
func formatPValue(p float64) string {
	if p < pFloor {
		return "< " + formatAlpha(pFloor)
	}
	return fixed(p, 4)
}

// pIs writes "p = 0.0083", or "p < 0.0001" below the floor.
func pIs(p float64) string {
	if p < pFloor {
		return "p " + formatPValue(p)
	}
	return "p = " + formatPValue(p)
}

// pAgainst writes the p-value route of a decision: "p = 0.0080 ≤ 0.05" or
// "p = 0.2301 > 0.05". The relation is that of the exact values; when four
// decimals would blur it (p = 0.050004 against 0.05), more decimals are
// printed until the printed numbers show the same relation.
func pAgainst(p, alpha float64) string {
	return pRoute(p, alpha, relation(p, alpha, "≤", ">"))
}

// pAgainstStrict is pAgainst for a threshold that p must fall strictly
// below: "p = 0.0002 < 0.001" or "p = 0.5271 ≥ 0.001".
func pAgainstStrict(p, threshold float64) string {
	return pRoute(p, threshold, relation(p, threshold, "<", "≥"))
}

func pRoute(p, alpha float64, rel string) string {
	a := formatAlpha(alpha)
	if p < pFloor && alpha >= pFloor {
		return "p < " + formatAlpha(pFloor) + " " + rel + " " + a
	}
	if p < pFloor {
		for sig := 2; sig <= 17; sig++ {
			s := strconv.FormatFloat(p, 'e', sig-1, 64)
			if sameRelation(parse(s), alpha, p, alpha) {
				return "p = " + s + " " + rel + " " + a
			}
		}
	}
	for d := 4; d <= 17; d++ {
		s := fixed(p, d)
		if sameRelation(parse(s), alpha, p, alpha) {
			return "p = " + s + " " + rel + " " + a
		}
	}
	return "p = " + strconv.FormatFloat(p, 'g', -1, 64) + " " + rel + " " + a
}

// statAgainst writes the statistic route of a decision, "|z| = 2.65 ≥ 1.96"
// for a two-sided test, "z = 1.80 ≥ 1.64" for the alternative greater and
// "z = -1.80 ≤ -1.64" for less. The critical value is taken by its size,
// whatever sign the test stored. Two decimals are printed, more when two
// decimals would blur the relation.
func statAgainst(z, critical float64, alternative string) string {
	c := math.Abs(critical)
	var name string
	var x, bound float64
	var rel string
	switch alternative {
	case "greater":
		name, x, bound = "z", z, c
		rel = relation(x, bound, "<", "≥")
	case "less":
		name, x, bound = "z", z, -c
		rel = relation(x, bound, "≤", ">")
	default:
		name, x, bound = "|z|", math.Abs(z), c
		rel = relation(x, bound, "<", "≥")
	}
	for d := numberDecimals; d <= 17; d++ {
		sx, sb := fixed(x, d), fixed(bound, d)
		if sameRelation(parse(sx), parse(sb), x, bound) {
			return name + " = " + sx + " " + rel + " " + sb
		}
	}
	return name + " = " + strconv.FormatFloat(x, 'g', -1, 64) + " " + rel + " " + strconv.FormatFloat(bound, 'g', -1, 64)
}

// relation returns below when x < y (or x <= y when below is "≤") and
// above otherwise.
func relation(x, y float64, below, above string) string {
	switch below {
	case "≤":
		if x <= y {
			return below
		}
	default:
		if x < y {
			return below
		}
	}
	return above
}

// sameRelation reports whether the printed pair (px, py) orders the same
// way as the exact pair (x, y).
func sameRelation(px, py, x, y float64) bool {
	return cmpFloat(px, py) == cmpFloat(x, y)
}

func cmpFloat(x, y float64) int {
	switch {
	case x < y:
		return -1
	case x > y:
		return 1
	}
	return 0
}

// parse reads back a number printed by this file; the strings it is given
// always parse.
func parse(s string) float64 {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		panic("report: cannot parse formatted number " + strconv.Quote(s))
	}
	return v
}

func round(x float64, digits int) float64 {
	p := math.Pow(10, float64(digits))
	return math.Round(x*p) / p
}

// formatTime prints an instant in UTC, "2026-03-02 00:00:00 UTC", with a
// fraction of a second only when there is one.
func formatTime(t time.Time) string {
	return t.UTC().Format("2006-01-02 15:04:05.999999999") + " UTC"
}

// formatDuration prints an attribution window in the largest whole unit
// that divides it: 604800 is "7 days", 5400 is "90 minutes".
func formatDuration(seconds int64) string {
	units := []struct {
		size int64
		name string
	}{
		{86400, "day"},
		{3600, "hour"},
		{60, "minute"},
		{1, "second"},
	}
	for _, u := range units {
		if seconds != 0 && seconds%u.size == 0 {
			n := seconds / u.size
			if n == 1 {
				return "1 " + u.name
			}
			return FormatCount(n) + " " + u.name + "s"
		}
	}
	return FormatCount(seconds) + " seconds"
}

// formatReason turns a snake_case reason into words: "bad_timestamp" is
// "bad timestamp".
func formatReason(r string) string {
	return strings.ReplaceAll(r, "_", " ")
}
