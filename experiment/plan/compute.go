package plan

import (
	"fmt"
	"math"

	"github.com/armtally/armtally/experiment/stats"
)

// Compute solves the plan in for in.Solve, with every comparison planned at
// [ComparisonAlpha] of the family's alpha:
//
//   - SolveUnits: the units per arm of [stats.SampleSizeNormal], rounded up
//     ([stats.SampleSizePerArm]);
//   - SolveEffect: the treatment rate [stats.DetectableRate] finds;
//   - SolvePower: the power of [stats.PowerNormal].
//
// The values derived from the inputs by arithmetic (the treatment rate of
// an effect, the effects, the per-comparison alpha, the family error and
// c(m)) are rounded to [DerivedDigits] significant digits; the solution
// keeps every digit.
//
// All three are the normal approximation with the pooled variance under H0
// and equal allocation; wrong-direction rejections are not counted, as in
// R's power.prop.test.
//
// References:
//
//  1. Fleiss JL, Levin B, Paik MC (2003). Statistical Methods for Rates and
//     Proportions, 3rd edition. Wiley, chapter 4.
//
// A request that cannot be planned is an [*Error] naming the problem: an
// input outside its range is BadInput, a target power at or below the
// per-comparison alpha / sides is PowerTooLow, and the others come from
// the effect ([MDE.TreatmentRate]) or the solution.
func Compute(in Input) (Result, error) {
	if err := check(in); err != nil {
		return Result{}, err
	}
	m := in.Comparisons()
	r := Result{
		Solve:                  in.Solve,
		Alternative:            in.Alternative,
		Baseline:               in.Baseline,
		Alpha:                  in.Alpha,
		Adjust:                 in.Adjust,
		Comparisons:            m,
		AlphaPerComparison:     ComparisonAlpha(in.Alpha, in.Adjust, m),
		Harmonic:               RoundDerived(Harmonic(m)),
		FamilyErrorIndependent: RoundDerived(1 - math.Pow(1-in.Alpha, float64(m))),
		Power:                  in.Power,
		Arms:                   in.Arms,
		Metrics:                in.Metrics,
	}
	if in.Solve != SolvePower && !(in.Power > r.AlphaPerComparison/Sides(in.Alternative)) {
		return r, &Error{Problem: PowerTooLow}
	}
	if err := solve(in, &r); err != nil {
		return r, err
	}
	r.EffectAbsolute = RoundDerived(r.TreatmentRate - in.Baseline)
	r.EffectRelative = RoundDerived(r.TreatmentRate/in.Baseline - 1)
	if r.UnitsPerArm > math.MaxInt64/int64(in.Arms) {
		return r, &Error{Problem: TooManyUnits, UnitsPerArm: r.UnitsPerArm}
	}
	r.TotalUnits = r.UnitsPerArm * int64(in.Arms)
	if in.DailyUnits > 0 {
		r.DailyUnits = in.DailyUnits
		r.Days = int64(math.Ceil(float64(r.TotalUnits) / in.DailyUnits))
	}
	return r, nil
}

// solve fills in the treatment rate, the units per arm and, when solving
// for it, the power.
func solve(in Input, r *Result) error {
	a := r.AlphaPerComparison
	var err error
	switch in.Solve {
	case SolveUnits:
		if r.TreatmentRate, err = in.Effect.TreatmentRate(in.Baseline, in.Alternative); err != nil {
			return err
		}
		if r.UnitsPerArmExact, err = stats.SampleSizeNormal(r.TreatmentRate, in.Baseline, a, in.Power, in.Alternative); err != nil {
			return &Error{Problem: NoEffect, Err: err}
		}
		if r.UnitsPerArm, err = stats.SampleSizePerArm(r.TreatmentRate, in.Baseline, a, in.Power, in.Alternative); err != nil {
			return &Error{Problem: EffectTooSmall, Err: err}
		}
	case SolveEffect:
		r.UnitsPerArm = in.UnitsPerArm
		if r.TreatmentRate, err = stats.DetectableRate(float64(in.UnitsPerArm), in.Baseline, a, in.Power, in.Alternative); err != nil {
			return &Error{Problem: TooFewUnits, Err: err}
		}
	case SolvePower:
		r.UnitsPerArm = in.UnitsPerArm
		if r.TreatmentRate, err = in.Effect.TreatmentRate(in.Baseline, in.Alternative); err != nil {
			return err
		}
		if r.Power, err = stats.PowerNormal(float64(in.UnitsPerArm), r.TreatmentRate, in.Baseline, a, in.Alternative); err != nil {
			return &Error{Problem: PowerFailed, Err: err}
		}
	}
	return nil
}

// check returns a BadInput error for the first field of in outside its
// range.
func check(in Input) error {
	bad := func(format string, args ...any) error {
		return &Error{Problem: BadInput, Err: fmt.Errorf(format, args...)}
	}
	rate := func(v float64) bool { return v > 0 && v < 1 }
	switch {
	case in.Solve != SolveUnits && in.Solve != SolveEffect && in.Solve != SolvePower:
		return bad("solve for %v", in.Solve)
	case !rate(in.Baseline):
		return bad("baseline %v, want a rate strictly between 0 and 1", in.Baseline)
	case in.Solve != SolveEffect && in.Effect.Value == 0:
		return bad("no effect to plan for")
	case in.Solve != SolveUnits && in.UnitsPerArm < 1:
		return bad("units per arm %d, want at least 1", in.UnitsPerArm)
	case !rate(in.Alpha):
		return bad("alpha %v, want a number strictly between 0 and 1", in.Alpha)
	case in.Solve != SolvePower && !rate(in.Power):
		return bad("power %v, want a number strictly between 0 and 1", in.Power)
	case in.Alternative != stats.TwoSided && in.Alternative != stats.Greater && in.Alternative != stats.Less:
		return bad("alternative %v", in.Alternative)
	case in.Adjust < stats.None || in.Adjust > stats.BenjaminiYekutieli:
		return bad("adjustment %v", in.Adjust)
	case in.Arms < 2 || in.Arms > MaxArms:
		return bad("%d arms, want 2 to %d", in.Arms, MaxArms)
	case in.Metrics < 1 || in.Metrics > MaxMetrics:
		return bad("%d metrics, want 1 to %d", in.Metrics, MaxMetrics)
	case !(in.DailyUnits >= 0) || math.IsInf(in.DailyUnits, 0):
		return bad("daily units %v, want a positive number or 0", in.DailyUnits)
	}
	return nil
}
