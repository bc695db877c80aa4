// Package plan sizes a conversion experiment before it starts, for the
// pooled two-proportion z test the analysis runs. Every arm gets the same
// number of units. Given a baseline rate, a plan solves for one of three
// quantities from the other two: the units per arm, the minimum detectable
// effect or the power.
//
// The method is the normal approximation with the pooled variance under H0
// (Fleiss, Levin and Paik; see [stats.SampleSizeNormal]). With several
// treatment arms or metrics, the (arms - 1) x metrics comparisons with the
// control form one family and each is planned at a per-comparison alpha
// (see [ComparisonAlpha]).
//
// The package computes; the words and the layout of a plan are the report
// package's.
package plan

import (
	"fmt"
	"strconv"

	"github.com/armtally/armtally/experiment/stats"
)

// Solve names the quantity a plan solves for.
type Solve int

const (
	// SolveUnits solves for the units per arm that detect the effect with
	// the target power.
	SolveUnits Solve = iota + 1
	// SolveEffect solves for the smallest effect the units per arm detect
	// with the target power.
	SolveEffect
	// SolvePower solves for the power the units per arm have for the
	// effect.
	SolvePower
)

// String returns "units_per_arm", "detectable_effect" or "power".
func (s Solve) String() string {
	switch s {
	case SolveUnits:
		return "units_per_arm"
	case SolveEffect:
		return "detectable_effect"
	case SolvePower:
		return "power"
	}
	return fmt.Sprintf("Solve(%d)", int(s))
}

// ParseSolve parses the names String returns.
func ParseSolve(s string) (Solve, error) {
	for _, v := range []Solve{SolveUnits, SolveEffect, SolvePower} {
		if s == v.String() {
			return v, nil
		}
	}
	return 0, fmt.Errorf("plan: solve for %q: want units_per_arm, detectable_effect or power", s)
}

// MaxArms and MaxMetrics bound Input.Arms and Input.Metrics far beyond any
// real experiment, so that every count of a plan fits easily.
const (
	MaxArms    = 1000
	MaxMetrics = 1000
)

// Input is a plan request.
type Input struct {
	// Solve is the quantity to solve for.
	Solve Solve
	// Baseline is the control arm's conversion rate, in (0, 1).
	Baseline float64
	// Effect is the minimum detectable effect, when solving for the units
	// or the power.
	Effect MDE
	// UnitsPerArm is the size of each arm, at least 1, when solving for
	// the effect or the power.
	UnitsPerArm int64
	// Alpha is the significance level of the family of comparisons, in
	// (0, 1).
	Alpha float64
	// Power is the target power, in (0, 1), when solving for the units or
	// the effect. It must exceed the per-comparison alpha / sides.
	Power float64
	// Alternative is the alternative hypothesis of every comparison.
	Alternative stats.Alternative
	// Adjust is the multiple-comparison adjustment the analysis will use.
	Adjust stats.AdjustMethod
	// Arms counts the arms, the control included: 2 to MaxArms.
	Arms int
	// Metrics counts the metrics each treatment is compared on: 1 to
	// MaxMetrics.
	Metrics int
	// DailyUnits is the number of units entering the experiment per day,
	// all arms together, or 0 when not known.
	DailyUnits float64
}

// Comparisons returns the number of comparisons with the control:
// (arms - 1) x metrics.
func (in Input) Comparisons() int { return (in.Arms - 1) * in.Metrics }

// Result is a solved plan.
type Result struct {
	// Solve is the quantity solved for.
	Solve       Solve
	Alternative stats.Alternative
	// Baseline is the control arm's rate and TreatmentRate the rate the
	// treatment is planned to reach (solving for the units or the power)
	// or can be detected at (solving for the effect).
	Baseline, TreatmentRate float64
	// EffectAbsolute is TreatmentRate - Baseline; EffectRelative is
	// TreatmentRate / Baseline - 1.
	EffectAbsolute, EffectRelative float64
	// Alpha is the family's alpha.
	Alpha  float64
	Adjust stats.AdjustMethod
	// Comparisons is (Arms - 1) x Metrics.
	Comparisons int
	// AlphaPerComparison is the level every comparison is planned at (see
	// [ComparisonAlpha]).
	AlphaPerComparison float64
	// Harmonic is c(m) = 1 + 1/2 + ... + 1/m for the m comparisons, the
	// factor Benjamini-Yekutieli divides by.
	Harmonic float64
	// FamilyErrorIndependent is 1 - (1 - Alpha)^Comparisons: the chance of
	// at least one false positive when independent comparisons are each
	// tested at Alpha without adjustment.
	FamilyErrorIndependent float64
	// Power is the target power, or the computed one when solving for the
	// power.
	Power         float64
	Arms, Metrics int
	UnitsPerArm   int64
	// UnitsPerArmExact is the unrounded solution when solving for the
	// units, and 0 otherwise.
	UnitsPerArmExact float64
	// TotalUnits is UnitsPerArm x Arms.
	TotalUnits int64
	// DailyUnits is Input.DailyUnits; Days is TotalUnits / DailyUnits
	// rounded up, 0 when DailyUnits is 0.
	DailyUnits float64
	Days       int64
}

// Sides returns 2 for a two-sided alternative and 1 for a one-sided one.
func Sides(alt stats.Alternative) float64 {
	if alt == stats.TwoSided {
		return 2
	}
	return 1
}

// Harmonic returns c(m) = 1 + 1/2 + ... + 1/m, summed in that order.
func Harmonic(m int) float64 {
	c := 0.0
	for k := 1; k <= m; k++ {
		c += 1 / float64(k)
	}
	return c
}

// ComparisonAlpha returns the per-comparison alpha a plan uses for a family
// of m comparisons tested at the family level alpha:
//
//   - alpha itself for one comparison, or with no adjustment;
//   - alpha / m for Bonferroni, Holm, Hochberg and Benjamini-Hochberg;
//   - alpha / (m c(m)) for Benjamini-Yekutieli, c(m) = 1 + 1/2 + ... + 1/m.
//
// Bonferroni rejects a comparison when p <= alpha/m. Holm and Hochberg
// reject every comparison with p <= alpha/m too (their thresholds run from
// alpha/m up), and so does Benjamini-Hochberg (thresholds k alpha/m), so
// planning at alpha/m gives each comparison at least the planned power under
// all four. Benjamini-Yekutieli's thresholds are k alpha/(m c(m)): its
// smallest one, alpha/(m c(m)), is the bound that gives the same guarantee.
//
// The thresholds are those of [stats.AdjustPValues], whose documentation
// names the source of each method.
//
// The result is rounded to [DerivedDigits] significant digits, so that
// 0.07 / 7 is 0.01 and not 0.010000000000000002.
func ComparisonAlpha(alpha float64, adjust stats.AdjustMethod, m int) float64 {
	if m == 1 || adjust == stats.None {
		return alpha
	}
	if adjust == stats.BenjaminiYekutieli {
		return RoundDerived(alpha / (float64(m) * Harmonic(m)))
	}
	return RoundDerived(alpha / float64(m))
}

// DerivedDigits is the number of significant digits a plan keeps of a
// value it derives from its inputs by arithmetic (a treatment rate from a
// baseline and an effect, an effect from two rates, a per-comparison
// alpha). The inputs are short decimals, and float64 arithmetic on them
// leaves an error in the 16th or 17th significant digit (0.04 x 1.1 is
// 0.044000000000000004); 12 digits drop that error, which is at least a
// thousand times smaller than the last digit kept, and keep far more
// digits than any plan needs. Values a plan solves for numerically (the
// unrounded units per arm, a detectable rate, a power) keep every digit.
const DerivedDigits = 12

// RoundDerived rounds v to [DerivedDigits] significant digits: the
// float64 nearest to the decimal with that many digits.
func RoundDerived(v float64) float64 { return roundSignificant(v, DerivedDigits) }

// roundSignificant returns the float64 nearest to v written with digits
// significant digits.
func roundSignificant(v float64, digits int) float64 {
	r, err := strconv.ParseFloat(strconv.FormatFloat(v, 'g', digits, 64), 64)
	if err != nil {
		return v // not reached: FormatFloat's output always parses
	}
	return r
}

// Problem names the reason a plan cannot be made.
type Problem int

const (
	// BadInput is an input field outside its range; Error.Err says which.
	BadInput Problem = iota + 1
	// PowerTooLow is a target power at or below the per-comparison alpha
	// / sides, which any size reaches.
	PowerTooLow
	// Direction is a signed effect against a one-sided alternative: a drop
	// under greater or a rise under less.
	Direction
	// RateOutOfRange is an effect that takes the treatment rate (in
	// Error.Rate) outside (0, 1).
	RateOutOfRange
	// NoEffect is an effect the sample-size formula refuses, such as one
	// that rounds away against the baseline; Error.Err says why.
	NoEffect
	// EffectTooSmall is an effect that needs more units per arm than any
	// experiment has; Error.Err says how many.
	EffectTooSmall
	// TooFewUnits is a size at which no treatment rate reaches the power.
	TooFewUnits
	// PowerFailed is a power that cannot be computed; Error.Err says why.
	PowerFailed
	// TooManyUnits is a total of units (Error.UnitsPerArm in every arm)
	// beyond any experiment.
	TooManyUnits
)

// Error is a plan request that cannot be planned.
type Error struct {
	Problem Problem
	// Rate is the treatment rate the effect would give, for RateOutOfRange.
	Rate float64
	// UnitsPerArm is the size of each arm, for TooManyUnits.
	UnitsPerArm int64
	// Err is the underlying error, if any.
	Err error
}

func (e *Error) Error() string {
	msg := map[Problem]string{
		BadInput:       "bad input",
		PowerTooLow:    "the power is at most the per-comparison alpha / sides",
		Direction:      "the effect goes against the one-sided alternative",
		RateOutOfRange: fmt.Sprintf("the treatment rate would be %v, want a rate strictly between 0 and 1", e.Rate),
		NoEffect:       "the effect cannot be planned for",
		EffectTooSmall: "the effect is too small to plan for",
		TooFewUnits:    "no treatment rate reaches the power at this size",
		PowerFailed:    "the power cannot be computed",
		TooManyUnits:   "the total of units is beyond any experiment",
	}[e.Problem]
	if msg == "" {
		msg = fmt.Sprintf("Problem(%d)", int(e.Problem))
	}
	if e.Err != nil {
		msg += ": " + e.Err.Error()
	}
	return "plan: " + msg
}

func (e *Error) Unwrap() error { return e.Err }
