package sequential

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// ErrBadSetting is wrapped by every error about a setting out of range: an
// alpha outside (0, 1), an information fraction that is not positive and
// finite or does not increase, a mixing variance that is not positive.
var ErrBadSetting = errors.New("sequential: bad setting")

// SpendingKind names an alpha-spending function.
type SpendingKind int

const (
	// OBrienFleming is the O'Brien-Fleming-type spending function of Lan
	// and DeMets (1983): little alpha early, most of it at the end.
	OBrienFleming SpendingKind = iota + 1
	// Pocock is the Pocock-type spending function of Lan and DeMets (1983):
	// alpha spent nearly evenly over the information.
	Pocock
)

// String returns the kind's name as the readout writes it.
func (k SpendingKind) String() string {
	switch k {
	case OBrienFleming:
		return "O'Brien-Fleming-type"
	case Pocock:
		return "Pocock-type"
	}
	return fmt.Sprintf("SpendingKind(%d)", int(k))
}

// Spending is an alpha-spending function: Kind applied to the total alpha
// Alpha of one comparison. For a two-sided test Alpha is the two-sided
// level (both tails together); for a one-sided test it is the one tail.
type Spending struct {
	Kind  SpendingKind
	Alpha float64
}

// Check returns an error wrapping ErrBadSetting when the kind is unknown or
// Alpha is not in (0, 1).
func (s Spending) Check() error {
	if s.Kind != OBrienFleming && s.Kind != Pocock {
		return fmt.Errorf("%w: unknown spending function %d", ErrBadSetting, int(s.Kind))
	}
	if !(s.Alpha > 0 && s.Alpha < 1) {
		return fmt.Errorf("%w: alpha %v is not in (0, 1)", ErrBadSetting, s.Alpha)
	}
	return nil
}

// Spent returns the cumulative alpha the function allows by information
// fraction t. Fractions above 1 (an overrun of the planned information) are
// capped to 1, where the whole of Alpha is spent; fractions at or below 0
// spend nothing.
func (s Spending) Spent(t float64) float64 {
	switch s.Kind {
	case OBrienFleming:
		return OBrienFlemingSpending(s.Alpha, t)
	case Pocock:
		return PocockSpending(s.Alpha, t)
	}
	return math.NaN()
}

// OBrienFlemingSpending is the O'Brien-Fleming-type alpha-spending function
// of Lan and DeMets (1983),
//
//	alpha(t) = 2 - 2 Phi(z_{1-alpha/2} / sqrt(t)),   0 < t <= 1,
//
// where Phi is the standard normal distribution function and z_q its q
// quantile. alpha(1) = alpha. Lan and DeMets wrote it for a two-sided test
// of level alpha, whose symmetric boundaries then spend alpha(t)/2 in each
// tail. The one-sided form is the same function of the one-sided level
// (each tail of a two-sided test of level 2 alpha): the spending used by
// Jennison and Turnbull (2000, section 7.2) and by R's rpact ("asOF") and
// gsDesign (sfLDOF), so a one-sided test at alpha and a two-sided test at
// 2 alpha have the same boundaries. t above 1 is capped to 1; t <= 0
// spends 0.
//
// Reference: K. K. G. Lan and D. L. DeMets (1983), Discrete sequential
// boundaries for clinical trials, Biometrika 70(3), 659-663.
func OBrienFlemingSpending(alpha, t float64) float64 {
	if t <= 0 {
		return 0
	}
	if t >= 1 {
		return alpha
	}
	z := distuv.UnitNormal.Quantile(1 - alpha/2)
	// 2 - 2 Phi(x) = erfc(x / sqrt 2), exact in the far tail.
	return math.Erfc(z / math.Sqrt(t) / math.Sqrt2)
}

// PocockSpending is the Pocock-type alpha-spending function of Lan and
// DeMets (1983),
//
//	alpha(t) = alpha ln(1 + (e - 1) t),   0 < t <= 1,
//
// which spends alpha almost in proportion to the information and gives
// boundaries close to Pocock's (1977) constant ones at equally spaced
// looks. t above 1 is capped to 1; t <= 0 spends 0.
//
// Reference: K. K. G. Lan and D. L. DeMets (1983), Discrete sequential
// boundaries for clinical trials, Biometrika 70(3), 659-663.
func PocockSpending(alpha, t float64) float64 {
	if t <= 0 {
		return 0
	}
	if t >= 1 {
		return alpha
	}
	return alpha * math.Log(1+(math.E-1)*t)
}

// SplitAlpha splits a familywise alpha across a family of m comparisons
// before spending: each comparison gets its own spending function at level
// alpha/m (the Bonferroni split). By the Bonferroni inequality the chance
// that any comparison of the family crosses its boundary at any look under
// the null hypotheses is at most m * alpha/m = alpha, whatever the
// dependence between the comparisons and whatever the look schedule, since
// each comparison's group-sequential test holds its own level over all its
// looks. It is conservative when the comparisons are correlated (several
// treatments against one control).
//
// Reference: C. E. Bonferroni (1936); for group-sequential families, C.
// Jennison and B. W. Turnbull (2000), Group Sequential Methods with
// Applications to Clinical Trials, Chapman & Hall/CRC, chapter 15.
func SplitAlpha(alpha float64, m int) (float64, error) {
	if !(alpha > 0 && alpha < 1) {
		return 0, fmt.Errorf("%w: alpha %v is not in (0, 1)", ErrBadSetting, alpha)
	}
	if m < 1 {
		return 0, fmt.Errorf("%w: a family of %d comparisons", ErrBadSetting, m)
	}
	return alpha / float64(m), nil
}
