package stats

import (
	"errors"
	"fmt"
	"math"
	"math/bits"
	"strings"
)

// ErrUndefined reports that a quantity is not defined for the given counts,
// for example a ratio of rates when the control arm has no conversions. The
// readout prints such a quantity as not estimable.
var ErrUndefined = errors.New("not defined for these counts")

// ErrBadCount reports a count that cannot come from a tally: a unit count
// that is not positive, a negative conversion count, or more conversions
// than units.
var ErrBadCount = errors.New("bad count")

// ErrBadParameter reports a setting outside its range, such as an alpha or
// a confidence level outside (0, 1) or a target rate outside (0, 1).
var ErrBadParameter = errors.New("bad parameter")

// Alternative is the alternative hypothesis of a test. Its zero value is
// [TwoSided]. Arm 1 is the treatment and arm 2 the control, so [Greater]
// means the treatment rate is higher (or, against a target rate p0, that
// the rate is above p0).
type Alternative int

const (
	// TwoSided tests p1 != p2 (or p != p0).
	TwoSided Alternative = iota
	// Greater tests p1 > p2: the treatment rate is higher (or p > p0).
	Greater
	// Less tests p1 < p2: the treatment rate is lower (or p < p0).
	Less
)

// String returns "two-sided", "greater" or "less".
func (a Alternative) String() string {
	switch a {
	case TwoSided:
		return "two-sided"
	case Greater:
		return "greater"
	case Less:
		return "less"
	}
	return fmt.Sprintf("Alternative(%d)", int(a))
}

// ParseAlternative parses "two-sided", "greater" or "less" (case and
// surrounding space ignored; "two.sided" is accepted for "two-sided").
func ParseAlternative(s string) (Alternative, error) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "two-sided", "two.sided":
		return TwoSided, nil
	case "greater":
		return Greater, nil
	case "less":
		return Less, nil
	}
	return TwoSided, fmt.Errorf("%w: alternative %q (want two-sided, greater or less)", ErrBadParameter, s)
}

// Valid reports whether a is one of TwoSided, Greater and Less.
func (a Alternative) Valid() bool { return a == TwoSided || a == Greater || a == Less }

// Options are the analysis settings the statistics depend on.
type Options struct {
	// Alpha is the significance level of every test.
	Alpha float64
	// Level is the confidence level of every interval.
	Level float64
	// Alternative is the alternative hypothesis of every test.
	Alternative Alternative
	// MinCount is the least number of conversions and of non-conversions
	// per arm for which the normal approximation is trusted.
	MinCount int64
}

// DefaultOptions returns alpha 0.05, level 0.95, a two-sided alternative and
// a minimum count of 5, the classic rule of thumb (some texts ask for 10).
func DefaultOptions() Options {
	return Options{Alpha: 0.05, Level: 0.95, Alternative: TwoSided, MinCount: 5}
}

// checkCount validates x conversions out of n units.
func checkCount(x, n int64) error {
	switch {
	case n <= 0:
		return fmt.Errorf("%w: %d units, want at least 1", ErrBadCount, n)
	case x < 0:
		return fmt.Errorf("%w: %d conversions, want at least 0", ErrBadCount, x)
	case x > n:
		return fmt.Errorf("%w: %d conversions out of %d units", ErrBadCount, x, n)
	}
	return nil
}

// checkTwo validates the counts of both arms and names the arm at fault.
func checkTwo(x1, n1, x2, n2 int64) error {
	if err := checkCount(x1, n1); err != nil {
		return fmt.Errorf("treatment: %w", err)
	}
	if err := checkCount(x2, n2); err != nil {
		return fmt.Errorf("control: %w", err)
	}
	return nil
}

// checkOpen validates a parameter that must lie strictly between 0 and 1.
func checkOpen(name string, v float64) error {
	if !(v > 0 && v < 1) {
		return fmt.Errorf("%w: %s %v, want a number in (0, 1)", ErrBadParameter, name, v)
	}
	return nil
}

func checkAlt(a Alternative) error {
	if !a.Valid() {
		return fmt.Errorf("%w: alternative %d", ErrBadParameter, int(a))
	}
	return nil
}

// clip returns v limited to [lo, hi].
func clip(v, lo, hi float64) float64 { return math.Max(lo, math.Min(hi, v)) }

// rateDiff returns x1/n1 - x2/n2 as (x1 n2 - x2 n1) / (n1 n2) with the
// numerator formed exactly in 128-bit integer arithmetic, so that two close
// rates near 1 (0.99999 - 0.99995) do not lose digits to cancellation.
// Counts must be valid (0 <= x <= n).
func rateDiff(x1, n1, x2, n2 int64) float64 {
	ah, al := bits.Mul64(uint64(x1), uint64(n2))
	bh, bl := bits.Mul64(uint64(x2), uint64(n1))
	sign := 1.0
	if ah < bh || (ah == bh && al < bl) {
		ah, al, bh, bl = bh, bl, ah, al
		sign = -1
	}
	lo, borrow := bits.Sub64(al, bl, 0)
	hi, _ := bits.Sub64(ah, bh, borrow)
	num := float64(hi)*(1<<64) + float64(lo)
	return sign * num / float64(n1) / float64(n2)
}

// rateVar returns p (1 - p) for p = x/n as x (n - x) / n^2, without forming
// 1 - p.
func rateVar(x, n int64) float64 {
	nf := float64(n)
	return (float64(x) / nf) * (float64(n-x) / nf)
}
