package main

import (
	"errors"
	"fmt"
	"io"
	"math"
	"strings"

	"github.com/spf13/pflag"

	"github.com/armtally/armtally/experiment/plan"
	"github.com/armtally/armtally/experiment/specfile"
	"github.com/armtally/armtally/experiment/stats"
	"github.com/armtally/armtally/report"
)

const planUsage = `Usage: armtally plan --baseline RATE --mde EFFECT [flags]
       armtally plan --baseline RATE --units-per-arm N [flags]
       armtally plan --baseline RATE --mde EFFECT --units-per-arm N [flags]

Sizes a conversion experiment before it starts, for the pooled
two-proportion z test that 'armtally analyze' runs. Every arm gets the
same number of units.

  --mde alone             the units each arm needs to detect the effect
                          with the chosen power
  --units-per-arm alone   the smallest effect that size detects with the
                          chosen power
  both                    the power that size has for that effect

The baseline (--baseline) is the control arm's conversion rate, 0.10 or
10%. The minimum detectable effect (--mde) is the smallest change in the
treatment's rate worth finding:
  2pp         an absolute change of 2 percentage points (10% to 12%)
  15%         a change relative to the baseline (10% to 11.5%)
  -2pp, -15%  a drop. Without a sign the change goes the tested way: up
              for two-sided and greater, down for less.

With several treatment arms or metrics, the (arms - 1) x metrics
comparisons with the control form one family, and each comparison is
planned at a per-comparison alpha (--adjust):
  none                          alpha itself; false positives in the
                                family add up
  bonferroni, holm, hochberg    alpha / comparisons: every comparison with
                                a p-value at most that is rejected by all
                                three, so the plan is conservative for Holm
                                and Hochberg
  bh                            alpha / comparisons, a conservative bound
                                for the false discovery rate
  by                            alpha / (comparisons x (1 + 1/2 + ... +
                                1/comparisons)), the smallest threshold
                                Benjamini-Yekutieli can apply

The method is the normal approximation with the pooled variance under H0
(Fleiss, Levin and Paik). The plan holds only if the experiment is read
once, at the planned size: looking repeatedly and stopping at the first
significant look inflates false positives.

Examples:
  armtally plan --baseline 10% --mde 2pp
  armtally plan --baseline 0.04 --mde 10% --arms 3 --metrics 2 --daily-units 20000
  armtally plan --baseline 10% --units-per-arm 10000 --daily-units 3000
  armtally plan --baseline 10% --mde 1pp --units-per-arm 5000 --alternative greater --json plan.json

Flags:
`

// planFlags holds the values of the plan flags.
type planFlags struct {
	baseline, mde, power string
	unitsPerArm          int64
	alpha                float64
	alternative, adjust  string
	arms, metrics        int
	dailyUnits           float64
	jsonOut              string
}

func newPlanFlagSet(f *planFlags, stderr io.Writer) *pflag.FlagSet {
	fs := pflag.NewFlagSet("plan", pflag.ContinueOnError)
	fs.SetOutput(stderr)
	fs.SortFlags = false
	fs.StringVar(&f.baseline, "baseline", "", "the control arm's conversion rate, 0.10 or 10% (required)")
	fs.StringVar(&f.mde, "mde", "", "minimum detectable effect: 2pp (absolute, percentage points) or 15% (relative to --baseline), optionally signed")
	fs.Int64Var(&f.unitsPerArm, "units-per-arm", 0, "units in each arm: solve for the detectable effect, or with --mde for the power")
	fs.Float64Var(&f.alpha, "alpha", 0.05, "significance level of the family of comparisons")
	fs.StringVar(&f.power, "power", "0.8", "chance of detecting the effect when it is real, 0.8 or 80%")
	fs.StringVar(&f.alternative, "alternative", "two-sided", "alternative hypothesis: two-sided, greater (treatment higher) or less")
	fs.IntVar(&f.arms, "arms", 2, "number of arms, the control included")
	fs.IntVar(&f.metrics, "metrics", 1, "number of metrics each treatment is compared on")
	fs.StringVar(&f.adjust, "adjust", "holm", "multiple-comparison adjustment the analysis will use: none, bonferroni, holm, hochberg, bh or by")
	fs.Float64Var(&f.dailyUnits, "daily-units", 0, "units entering the experiment per day, all arms together: also print the days needed")
	fs.StringVar(&f.jsonOut, "json", "", "also write the plan as JSON to this file")
	return fs
}

// parsePlan parses and checks the plan command line. Every check is
// against a flag, in the order the flags are listed, so that the message
// names the first flag that is wrong.
func parsePlan(args []string, stdout, stderr io.Writer) (plan.Input, planFlags, error) {
	var f planFlags
	var in plan.Input
	fs := newPlanFlagSet(&f, stderr)
	if err := parseFlags(fs, args, planUsage, stdout); err != nil {
		return in, f, err
	}
	if fs.NArg() > 0 {
		return in, f, usagef("plan: unexpected arguments %s (plan takes flags only)", strings.Join(fs.Args(), " "))
	}
	if !fs.Changed("baseline") {
		return in, f, usagef("plan: give the control arm's conversion rate with --baseline, as in --baseline 10%%")
	}
	var err error
	if in.Baseline, err = specfile.ParseRate(f.baseline); err != nil {
		return in, f, usagef("plan: --baseline: %v", err)
	}
	hasMDE, hasUnits := fs.Changed("mde"), fs.Changed("units-per-arm")
	switch {
	case hasMDE && hasUnits:
		in.Solve = plan.SolvePower
		if fs.Changed("power") {
			return in, f, usagef("plan: --power has no use with both --mde and --units-per-arm: the plan then solves for the power")
		}
	case hasMDE:
		in.Solve = plan.SolveUnits
	case hasUnits:
		in.Solve = plan.SolveEffect
	default:
		return in, f, usagef("plan: give --mde (to solve for the units per arm) or --units-per-arm (to solve for the detectable effect), or both (for the power)")
	}
	if in.Alternative, err = stats.ParseAlternative(f.alternative); err != nil {
		return in, f, usagef("plan: --alternative %q: want two-sided, greater or less", f.alternative)
	}
	if hasMDE {
		if in.Effect, err = plan.ParseMDE(f.mde); err != nil {
			return in, f, planError(in, err)
		}
		if _, err := in.Effect.TreatmentRate(in.Baseline, in.Alternative); err != nil {
			return in, f, planError(in, err)
		}
	}
	if hasUnits {
		if f.unitsPerArm < 1 {
			return in, f, usagef("plan: --units-per-arm %d: want at least 1", f.unitsPerArm)
		}
		in.UnitsPerArm = f.unitsPerArm
	}
	return in, f, parsePlanRest(fs, &f, &in)
}

// parsePlanRest checks the flags after the effect and the size.
func parsePlanRest(fs *pflag.FlagSet, f *planFlags, in *plan.Input) error {
	if !(f.alpha > 0 && f.alpha < 1) {
		return usagef("plan: --alpha %v is not strictly between 0 and 1", f.alpha)
	}
	in.Alpha = f.alpha
	if in.Solve != plan.SolvePower {
		var err error
		if in.Power, err = specfile.ParseRate(f.power); err != nil {
			return usagef("plan: --power: %v", err)
		}
	}
	if f.arms < 2 || f.arms > plan.MaxArms {
		return usagef("plan: --arms %d: want the control and at least one treatment, 2 to %d arms", f.arms, plan.MaxArms)
	}
	in.Arms = f.arms
	if f.metrics < 1 || f.metrics > plan.MaxMetrics {
		return usagef("plan: --metrics %d: want 1 to %d", f.metrics, plan.MaxMetrics)
	}
	in.Metrics = f.metrics
	var err error
	if in.Adjust, err = stats.ParseAdjustMethod(f.adjust); err != nil {
		return usagef("plan: --adjust %q: want none, bonferroni, holm, hochberg, bh or by", f.adjust)
	}
	if fs.Changed("daily-units") {
		if !(f.dailyUnits > 0) || math.IsInf(f.dailyUnits, 0) {
			return usagef("plan: --daily-units %v: want a positive number", f.dailyUnits)
		}
		in.DailyUnits = f.dailyUnits
	}
	return nil
}

// planError turns an error of the plan package into a message naming the
// flag that caused it; an input the flags let through unchecked, or a
// power that cannot be computed, is an unexpected failure.
func planError(in plan.Input, err error) error {
	var me *plan.MDEError
	if errors.As(err, &me) {
		return usagef("plan: --mde %q: %s", me.Text, me.Reason)
	}
	var pe *plan.Error
	if !errors.As(err, &pe) {
		return fmt.Errorf("plan: %w", err)
	}
	mde := in.Effect.Text
	switch pe.Problem {
	case plan.PowerTooLow:
		a, s := plan.ComparisonAlpha(in.Alpha, in.Adjust, in.Comparisons()), plan.Sides(in.Alternative)
		return usagef("plan: --power %s: want more than the per-comparison alpha / %v = %s",
			report.FormatPlanPower(in.Power), s, report.FormatPlanAlpha(plan.RoundDerived(a/s)))
	case plan.Direction:
		if in.Alternative == stats.Greater {
			return usagef("plan: --mde %q is a drop, but --alternative greater tests for a rise", mde)
		}
		return usagef("plan: --mde %q is a rise, but --alternative less tests for a drop", mde)
	case plan.RateOutOfRange:
		return usagef("plan: --mde %q: the treatment rate would be %s, want a rate strictly between 0%% and 100%% (baseline %s)",
			mde, report.FormatPlanRate(pe.Rate), report.FormatPlanRate(in.Baseline))
	case plan.NoEffect:
		return usagef("plan: --mde %q: %v", mde, pe.Err)
	case plan.EffectTooSmall:
		return usagef("plan: --mde %q is too small to plan for: %v", mde, pe.Err)
	case plan.TooFewUnits:
		dir := "up to 100%"
		if in.Alternative == stats.Less {
			dir = "down to 0%"
		}
		return usagef("plan: --units-per-arm %s is too few: no treatment rate %s reaches power %s against a baseline of %s",
			report.FormatCount(in.UnitsPerArm), dir, report.FormatPlanPower(in.Power), report.FormatPlanRate(in.Baseline))
	case plan.TooManyUnits:
		return usagef("plan: %s units per arm in %s arms is beyond any experiment", report.FormatCount(pe.UnitsPerArm), report.FormatCount(int64(in.Arms)))
	}
	return fmt.Errorf("plan: %w", pe.Err)
}

func runPlan(args []string, stdout, stderr io.Writer) error {
	in, f, err := parsePlan(args, stdout, stderr)
	if err != nil {
		return err
	}
	r, err := plan.Compute(in)
	if err != nil {
		return planError(in, err)
	}
	if f.jsonOut != "" {
		if err := report.WriteFileAtomic(f.jsonOut, func(w io.Writer) error { return report.WritePlanJSON(w, r) }); err != nil {
			return fmt.Errorf("writing the JSON plan: %w", err)
		}
	}
	if err := report.WritePlan(stdout, r); err != nil {
		return fmt.Errorf("writing the plan: %w", err)
	}
	return nil
}
