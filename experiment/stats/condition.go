package stats

import (
	"fmt"
	"strconv"
)

// plural returns "1 conversion" or "3 conversions".
func plural(n int64, word string) string {
	if n == 1 {
		return "1 " + word
	}
	return strconv.FormatInt(n, 10) + " " + word + "s"
}

// TwoSampleCondition checks the classic rule of thumb for the normal
// approximation of a two-proportion comparison: at least minCount
// conversions and minCount non-conversions in each arm (minCount is 5 by
// default, see [DefaultOptions]; some texts ask for 10). Arm 1 is the
// treatment, arm 2 the control.
//
// It returns ok = true when all four counts reach minCount, and otherwise
// one warning per count that falls short, treatment first, for example
//
//	normal approximation not justified: control has 3 conversions, needs at least 5
//
// When the rule fails armtally decides by [FisherExact] instead of
// [TwoProportionZTest]. The function does not validate the counts beyond
// this: invalid counts (n <= 0, x < 0, x > n) give ok = false and a warning
// naming the arm, and a minCount below 1 is treated as 1.
//
// References:
//
//  1. Fleiss JL, Levin B, Paik MC (2003). Statistical Methods for Rates and
//     Proportions, 3rd edition. Wiley, chapter 2.
func TwoSampleCondition(x1, n1, x2, n2, minCount int64) (ok bool, warnings []string) {
	return TwoSampleConditionNamed(x1, n1, x2, n2, minCount, "treatment", "control")
}

// TwoSampleConditionNamed is [TwoSampleCondition] with the arms' names in
// the warnings instead of "treatment" and "control".
func TwoSampleConditionNamed(x1, n1, x2, n2, minCount int64, name1, name2 string) (ok bool, warnings []string) {
	minCount = max(minCount, 1)
	ok = true
	for _, arm := range []struct {
		name string
		x, n int64
	}{{name1, x1, n1}, {name2, x2, n2}} {
		if err := checkCount(arm.x, arm.n); err != nil {
			ok = false
			warnings = append(warnings, fmt.Sprintf("normal approximation not checked: %s: %v", arm.name, err))
			continue
		}
		if arm.x < minCount {
			ok = false
			warnings = append(warnings, fmt.Sprintf("normal approximation not justified: %s has %s, needs at least %d", arm.name, plural(arm.x, "conversion"), minCount))
		}
		if f := arm.n - arm.x; f < minCount {
			ok = false
			warnings = append(warnings, fmt.Sprintf("normal approximation not justified: %s has %s, needs at least %d", arm.name, plural(f, "non-conversion"), minCount))
		}
	}
	return ok, warnings
}

// OneSampleCondition checks the classic rule of thumb for the normal
// approximation of a one-proportion test against a target rate p0: the
// expected counts n p0 and n (1 - p0) under H0 are both at least minCount
// (5 by default; some texts ask for 10).
//
// It returns ok = true when both reach minCount, and otherwise a warning
// for each that falls short, for example
//
//	normal approximation not justified: expected conversions n p0 = 2.5, needs at least 5
//
// When the rule fails armtally decides by [BinomialExact] instead of
// [OneProportionZTest]. An n <= 0 or a p0 outside (0, 1) gives ok = false
// and a warning; a minCount below 1 is treated as 1.
//
// References:
//
//  1. Fleiss JL, Levin B, Paik MC (2003). Statistical Methods for Rates and
//     Proportions, 3rd edition. Wiley, chapter 2.
func OneSampleCondition(n int64, p0 float64, minCount int64) (ok bool, warnings []string) {
	minCount = max(minCount, 1)
	if n <= 0 {
		return false, []string{fmt.Sprintf("normal approximation not checked: %d units", n)}
	}
	if !(p0 > 0 && p0 < 1) {
		return false, []string{fmt.Sprintf("normal approximation not checked: target rate %v is not in (0, 1)", p0)}
	}
	ok = true
	mc := float64(minCount)
	if e := float64(n) * p0; e < mc {
		ok = false
		warnings = append(warnings, fmt.Sprintf("normal approximation not justified: expected conversions n p0 = %.4g, needs at least %d", e, minCount))
	}
	if e := float64(n) * (1 - p0); e < mc {
		ok = false
		warnings = append(warnings, fmt.Sprintf("normal approximation not justified: expected non-conversions n (1 - p0) = %.4g, needs at least %d", e, minCount))
	}
	return ok, warnings
}
