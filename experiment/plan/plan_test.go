package plan

import (
	"errors"
	"math"
	"strings"
	"testing"

	"github.com/armtally/armtally/experiment/stats"
)

// The check values below come from REFERENCE-VALUES.md, section 11
// (sample-size planning), each named by its case id: R 4.2.2
// stats::power.prop.test with tol = 1e-12, the normal approximation with
// the pooled variance under H0, equal allocation, one tail counted. Totals,
// days and per-comparison alphas are hand arithmetic worked out beside them.

// near reports whether got is within rel |want| of want.
func near(got, want, rel float64) bool { return math.Abs(got-want) <= rel*math.Abs(want) }

// mustMDE parses an effect written in the test table.
func mustMDE(t *testing.T, s string) MDE {
	t.Helper()
	m, err := ParseMDE(s)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// units returns a request solving for the units per arm, with the defaults
// of the command (alpha 0.05, power 0.8, two-sided, Holm, 2 arms, 1 metric).
func units(t *testing.T, baseline float64, mde string) Input {
	return Input{Solve: SolveUnits, Baseline: baseline, Effect: mustMDE(t, mde), Alpha: 0.05, Power: 0.8,
		Adjust: stats.Holm, Arms: 2, Metrics: 1}
}

func TestComputeUnitsPerArm(t *testing.T) {
	with := func(in Input, f func(*Input)) Input { f(&in); return in }
	cases := []struct {
		name  string
		in    Input
		units int64   // exact
		exact float64 // unrounded n, rel 1e-10
		// alphaPer is the per-comparison alpha (rel 1e-12).
		alphaPer float64
	}{
		// SS-01: p1 = 0.1, p2 = 0.12, alpha 0.05, power 0.8, two-sided.
		{"SS-01 absolute", units(t, 0.1, "2pp"), 3841, 3840.8474824362756, 0.05},
		{"SS-01 relative", units(t, 0.1, "20%"), 3841, 3840.8474824362756, 0.05},
		// SS-01 with the rates swapped (12% down to 10%): the formula is
		// symmetric in p1 and p2.
		{"SS-01 drop", units(t, 0.12, "-2pp"), 3841, 3840.8474824362756, 0.05},
		// SS-02: p1 = 0.05, p2 = 0.055.
		{"SS-02", units(t, 0.05, "0.5pp"), 31234, 31233.43794013004, 0.05},
		// SS-03: p1 = 0.2, p2 = 0.25, power 0.9.
		{"SS-03", with(units(t, 0.2, "5pp"), func(in *Input) { in.Power = 0.9 }), 1464, 1463.707305029553, 0.05},
		{"SS-03 relative", with(units(t, 0.2, "25%"), func(in *Input) { in.Power = 0.9 }), 1464, 1463.707305029553, 0.05},
		// SS-04: p1 = 0.5, p2 = 0.6, alpha 0.01, reached directly and
		// through each adjustment's per-comparison alpha.
		{"SS-04", with(units(t, 0.5, "10pp"), func(in *Input) { in.Alpha = 0.01 }), 577, 576.6680740033802, 0.01},
		// Bonferroni, 3 arms: 2 comparisons, 0.02 / 2 = 0.01.
		{"SS-04 bonferroni", with(units(t, 0.5, "10pp"), func(in *Input) { in.Alpha, in.Arms, in.Adjust = 0.02, 3, stats.Bonferroni }), 577, 576.6680740033802, 0.01},
		// Holm, 6 arms: 5 comparisons, 0.05 / 5 = 0.01.
		{"SS-04 holm", with(units(t, 0.5, "10pp"), func(in *Input) { in.Arms = 6 }), 577, 576.6680740033802, 0.01},
		// Hochberg, 3 arms x 2 metrics: 4 comparisons, 0.04 / 4 = 0.01.
		{"SS-04 hochberg", with(units(t, 0.5, "10pp"), func(in *Input) { in.Alpha, in.Arms, in.Metrics, in.Adjust = 0.04, 3, 2, stats.Hochberg }), 577, 576.6680740033802, 0.01},
		// Benjamini-Hochberg, 2 arms x 5 metrics: 5 comparisons, 0.05 / 5.
		{"SS-04 bh", with(units(t, 0.5, "10pp"), func(in *Input) { in.Metrics, in.Adjust = 5, stats.BenjaminiHochberg }), 577, 576.6680740033802, 0.01},
		// Benjamini-Yekutieli, 3 arms: m = 2, c(2) = 1 + 1/2 = 1.5,
		// 0.03 / (2 x 1.5) = 0.01.
		{"SS-04 by", with(units(t, 0.5, "10pp"), func(in *Input) { in.Alpha, in.Arms, in.Adjust = 0.03, 3, stats.BenjaminiYekutieli }), 577, 576.6680740033802, 0.01},
		// No adjustment: 4 arms, each comparison at alpha 0.01 itself.
		{"SS-04 none", with(units(t, 0.5, "10pp"), func(in *Input) { in.Alpha, in.Arms, in.Adjust = 0.01, 4, stats.None }), 577, 576.6680740033802, 0.01},
		// SS-05: p1 = 0.1, p2 = 0.11, one-sided.
		{"SS-05 greater", with(units(t, 0.1, "1pp"), func(in *Input) { in.Alternative = stats.Greater }), 11620, 11619.069936521051, 0.05},
		// SS-05 with the rates swapped: 11% down to 10%, unsigned under
		// less (a drop) and signed.
		{"SS-05 less", with(units(t, 0.11, "1pp"), func(in *Input) { in.Alternative = stats.Less }), 11620, 11619.069936521051, 0.05},
		{"SS-05 less signed", with(units(t, 0.11, "-1pp"), func(in *Input) { in.Alternative = stats.Less }), 11620, 11619.069936521051, 0.05},
		// SS-06: p1 = 0.5, p2 = 0.75, power 0.9.
		{"SS-06", with(units(t, 0.5, "50%"), func(in *Input) { in.Power = 0.9 }), 77, 76.70692845177744, 0.05},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			r, err := Compute(tc.in)
			if err != nil {
				t.Fatal(err)
			}
			if r.Solve != SolveUnits || r.UnitsPerArm != tc.units {
				t.Errorf("solve %v, units per arm %d; want %v, %d", r.Solve, r.UnitsPerArm, SolveUnits, tc.units)
			}
			if !near(r.UnitsPerArmExact, tc.exact, 1e-10) {
				t.Errorf("exact units %v, want %v", r.UnitsPerArmExact, tc.exact)
			}
			if !near(r.AlphaPerComparison, tc.alphaPer, 1e-12) {
				t.Errorf("alpha per comparison %v, want %v", r.AlphaPerComparison, tc.alphaPer)
			}
			// Total: arms x units per arm (hand arithmetic).
			if want := tc.units * int64(tc.in.Arms); r.TotalUnits != want {
				t.Errorf("total units %d, want %d", r.TotalUnits, want)
			}
		})
	}
}

func TestComputePower(t *testing.T) {
	cases := []struct {
		name        string
		baseline    float64
		mde         string
		unitsPerArm int64
		power       float64 // rel 1e-10
	}{
		// SS-07: n = 50, p1 = 0.5, p2 = 0.75, alpha 0.05, two-sided.
		{"SS-07", 0.5, "25pp", 50, 0.7401659013313879},
		{"SS-07 relative", 0.5, "50%", 50, 0.7401659013313879},
		// SS-08: n = 5000, p1 = 0.1, p2 = 0.11, alpha 0.05, two-sided.
		{"SS-08", 0.1, "1pp", 5000, 0.3710889343229116},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			in := Input{Solve: SolvePower, Baseline: tc.baseline, Effect: mustMDE(t, tc.mde), UnitsPerArm: tc.unitsPerArm,
				Alpha: 0.05, Adjust: stats.Holm, Arms: 2, Metrics: 1}
			r, err := Compute(in)
			if err != nil {
				t.Fatal(err)
			}
			if !near(r.Power, tc.power, 1e-10) || r.UnitsPerArm != tc.unitsPerArm || r.UnitsPerArmExact != 0 {
				t.Errorf("power %v, units %d, exact %v; want %v, %d, 0", r.Power, r.UnitsPerArm, r.UnitsPerArmExact, tc.power, tc.unitsPerArm)
			}
		})
	}
}

func TestComputeDetectableEffect(t *testing.T) {
	// SS-09: n = 10000 per arm, p1 = 0.1, alpha 0.05, power 0.8,
	// two-sided: detectable p2 = 0.11220102507438608 (rel 1e-8), so the
	// absolute effect is p2 - 0.1 and the relative one (p2 - 0.1) / 0.1;
	// their tolerances follow from p2's (1e-8 x 0.112 ~ 1.2e-9).
	r, err := Compute(Input{Solve: SolveEffect, Baseline: 0.1, UnitsPerArm: 10000, Alpha: 0.05, Power: 0.8,
		Adjust: stats.Holm, Arms: 2, Metrics: 1})
	if err != nil {
		t.Fatal(err)
	}
	if !near(r.TreatmentRate, 0.11220102507438608, 1e-8) {
		t.Errorf("treatment rate %v, want 0.11220102507438608 (SS-09)", r.TreatmentRate)
	}
	if math.Abs(r.EffectAbsolute-0.01220102507438608) > 2e-9 {
		t.Errorf("absolute effect %v, want 0.01220102507438608 (SS-09)", r.EffectAbsolute)
	}
	if math.Abs(r.EffectRelative-0.1220102507438608) > 2e-8 {
		t.Errorf("relative effect %v, want 0.1220102507438608 (SS-09)", r.EffectRelative)
	}
	if r.UnitsPerArm != 10000 || r.UnitsPerArmExact != 0 || r.TotalUnits != 20000 {
		t.Errorf("units per arm %d, exact %v, total %d; want 10000, 0, 20000", r.UnitsPerArm, r.UnitsPerArmExact, r.TotalUnits)
	}
}

func TestComputeTotalsAndDays(t *testing.T) {
	cases := []struct {
		name        string
		in          Input
		total, days int64
	}{
		// SS-01: 3841 per arm; 2 x 3841 = 7682; 7682 / 500 = 15.364, so 16.
		{"SS-01 two arms", Input{Solve: SolveUnits, Baseline: 0.1, Effect: MDE{Text: "2pp", Value: 0.02}, Alpha: 0.05, Power: 0.8, Arms: 2, Metrics: 1, DailyUnits: 500}, 7682, 16},
		// SS-01 unadjusted in 3 arms: 3 x 3841 = 11523; 11.523 days, so 12.
		{"SS-01 three arms", Input{Solve: SolveUnits, Baseline: 0.1, Effect: MDE{Text: "2pp", Value: 0.02}, Alpha: 0.05, Power: 0.8, Arms: 3, Metrics: 1, DailyUnits: 1000}, 11523, 12},
		// SS-04 through Holm in 6 arms: 6 x 577 = 3462; 3462 / 1731 = 2
		// exactly, not rounded up.
		{"SS-04 six arms", Input{Solve: SolveUnits, Baseline: 0.5, Effect: MDE{Text: "10pp", Value: 0.1}, Alpha: 0.05, Power: 0.8, Adjust: stats.Holm, Arms: 6, Metrics: 1, DailyUnits: 1731}, 3462, 2},
		// A given size: 2 x 10000 = 20000; 20000 / 3000 = 6.67, so 7.
		{"given size", Input{Solve: SolveEffect, Baseline: 0.1, UnitsPerArm: 10000, Alpha: 0.05, Power: 0.8, Arms: 2, Metrics: 1, DailyUnits: 3000}, 20000, 7},
		// Without daily units there are no days.
		{"no daily units", Input{Solve: SolveEffect, Baseline: 0.1, UnitsPerArm: 10000, Alpha: 0.05, Power: 0.8, Arms: 2, Metrics: 1}, 20000, 0},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			r, err := Compute(tc.in)
			if err != nil {
				t.Fatal(err)
			}
			if r.TotalUnits != tc.total || r.Days != tc.days || r.DailyUnits != tc.in.DailyUnits {
				t.Errorf("total %d, days %d, daily %v; want %d, %d, %v", r.TotalUnits, r.Days, r.DailyUnits, tc.total, tc.days, tc.in.DailyUnits)
			}
		})
	}
}

// TestComparisonAlpha checks the per-comparison alpha and the factors the
// notes print, by hand arithmetic.
func TestComparisonAlpha(t *testing.T) {
	cases := []struct {
		adjust          stats.AdjustMethod
		alpha           float64
		m               int
		want            float64
		harmonic, fwIID float64
	}{
		// One comparison: alpha itself whatever the method; c(1) = 1;
		// 1 - 0.95 = 0.05.
		{stats.BenjaminiYekutieli, 0.05, 1, 0.05, 1, 0.05},
		// None: alpha; 1 - 0.95^3 = 0.142625.
		{stats.None, 0.05, 3, 0.05, 1 + 1.0/2 + 1.0/3, 0.142625},
		// 0.05 / 4 = 0.0125 for the four Bonferroni-level methods.
		{stats.Bonferroni, 0.05, 4, 0.0125, 2.0833333333333333, 1 - 0.95*0.95*0.95*0.95},
		{stats.Holm, 0.05, 4, 0.0125, 2.0833333333333333, 1 - 0.95*0.95*0.95*0.95},
		{stats.Hochberg, 0.05, 4, 0.0125, 2.0833333333333333, 1 - 0.95*0.95*0.95*0.95},
		{stats.BenjaminiHochberg, 0.05, 4, 0.0125, 2.0833333333333333, 1 - 0.95*0.95*0.95*0.95},
		// c(3) = 11/6; 0.05 / (3 x 11/6) = 0.05 / 5.5 = 0.00909090...
		{stats.BenjaminiYekutieli, 0.05, 3, 0.05 / 5.5, 11.0 / 6, 0.142625},
	}
	for _, tc := range cases {
		// ComparisonAlpha keeps 12 significant digits (DerivedDigits).
		if got := ComparisonAlpha(tc.alpha, tc.adjust, tc.m); !near(got, tc.want, 1e-11) {
			t.Errorf("ComparisonAlpha(%v, %v, %d) = %v, want %v", tc.alpha, tc.adjust, tc.m, got, tc.want)
		}
		if got := Harmonic(tc.m); !near(got, tc.harmonic, 1e-14) {
			t.Errorf("Harmonic(%d) = %v, want %v", tc.m, got, tc.harmonic)
		}
		in := Input{Solve: SolveEffect, Baseline: 0.1, UnitsPerArm: 10000, Alpha: tc.alpha, Power: 0.8,
			Adjust: tc.adjust, Arms: tc.m + 1, Metrics: 1}
		r, err := Compute(in)
		if err != nil {
			t.Fatal(err)
		}
		// The plan keeps c(m) to 12 significant digits (DerivedDigits).
		if r.Comparisons != tc.m || !near(r.FamilyErrorIndependent, tc.fwIID, 1e-12) || !near(r.Harmonic, tc.harmonic, 1e-11) {
			t.Errorf("%v over %d: comparisons %d, family error %v, harmonic %v; want %d, %v, %v",
				tc.adjust, tc.m, r.Comparisons, r.FamilyErrorIndependent, r.Harmonic, tc.m, tc.fwIID, tc.harmonic)
		}
	}
	// Several metrics count as comparisons too: 3 arms x 2 metrics = 4.
	if got := (Input{Arms: 3, Metrics: 2}).Comparisons(); got != 4 {
		t.Errorf("3 arms x 2 metrics: %d comparisons, want 4", got)
	}
}

func TestParseMDE(t *testing.T) {
	cases := []struct {
		in               string
		value            float64
		relative, signed bool
		reason           string // "" when it parses
	}{
		{"2pp", 0.02, false, false, ""},
		{"15%", 0.15, true, false, ""},
		{" -0.5pp ", -0.005, false, true, ""},
		{"+20%", 0.2, true, true, ""},
		{"2 pp", 0.02, false, false, ""},
		{"0.02", 0, false, false, "give a unit"},
		{"0pp", 0, false, false, "a zero effect"},
		{"twopp", 0, false, false, `"two" is not a number`},
		{"--2pp", 0, false, false, `"-2" is not a number`},
		{"inf%", 0, false, false, `"inf" is not a number`},
		{"NaNpp", 0, false, false, `"NaN" is not a number`},
		{"", 0, false, false, "give a unit"},
	}
	for _, tc := range cases {
		m, err := ParseMDE(tc.in)
		if tc.reason != "" {
			var me *MDEError
			if !errors.As(err, &me) || me.Text != tc.in || !strings.Contains(me.Reason, tc.reason) {
				t.Errorf("ParseMDE(%q) = %v; want an MDEError with %q", tc.in, err, tc.reason)
			}
			continue
		}
		if err != nil || !near(m.Value, tc.value, 1e-15) || m.Relative != tc.relative || m.Signed != tc.signed || m.Text != tc.in {
			t.Errorf("ParseMDE(%q) = %+v, %v; want value %v, relative %v, signed %v", tc.in, m, err, tc.value, tc.relative, tc.signed)
		}
	}
}

func TestTreatmentRate(t *testing.T) {
	cases := []struct {
		mde      string
		baseline float64
		alt      stats.Alternative
		want     float64 // hand arithmetic
		problem  Problem // 0 when it succeeds
	}{
		{"2pp", 0.1, stats.TwoSided, 0.12, 0},
		{"20%", 0.1, stats.TwoSided, 0.12, 0},
		{"2pp", 0.1, stats.Less, 0.08, 0}, // unsigned goes the tested way
		{"20%", 0.1, stats.Less, 0.08, 0},
		{"-2pp", 0.1, stats.TwoSided, 0.08, 0},
		{"-2pp", 0.1, stats.Greater, 0, Direction},
		{"+2pp", 0.1, stats.Less, 0, Direction},
		{"5pp", 0.95, stats.TwoSided, 1, RateOutOfRange},
		{"-100%", 0.1, stats.TwoSided, 0, RateOutOfRange},
	}
	for _, tc := range cases {
		got, err := mustMDE(t, tc.mde).TreatmentRate(tc.baseline, tc.alt)
		var pe *Error
		switch {
		case tc.problem == 0 && (err != nil || !near(got, tc.want, 1e-12)):
			t.Errorf("%s from %v (%v): %v, %v; want %v", tc.mde, tc.baseline, tc.alt, got, err, tc.want)
		case tc.problem != 0 && (!errors.As(err, &pe) || pe.Problem != tc.problem):
			t.Errorf("%s from %v (%v): %v; want problem %d", tc.mde, tc.baseline, tc.alt, err, tc.problem)
		case tc.problem == RateOutOfRange && !near(pe.Rate, tc.want, 1e-12):
			t.Errorf("%s from %v: rate %v in the error, want %v", tc.mde, tc.baseline, pe.Rate, tc.want)
		}
	}
}

// TestComputeErrors checks that every request that cannot be planned is
// an *Error naming the problem, and none panics.
func TestComputeErrors(t *testing.T) {
	ok := Input{Solve: SolveUnits, Baseline: 0.1, Effect: MDE{Text: "2pp", Value: 0.02}, Alpha: 0.05, Power: 0.8, Arms: 2, Metrics: 1}
	with := func(f func(*Input)) Input { in := ok; f(&in); return in }
	cases := []struct {
		name    string
		in      Input
		problem Problem
	}{
		{"zero input", Input{}, BadInput},
		{"solve", with(func(in *Input) { in.Solve = 9 }), BadInput},
		{"baseline", with(func(in *Input) { in.Baseline = 1 }), BadInput},
		{"baseline NaN", with(func(in *Input) { in.Baseline = math.NaN() }), BadInput},
		{"no effect", with(func(in *Input) { in.Effect = MDE{} }), BadInput},
		{"no units", with(func(in *Input) { in.Solve = SolveEffect }), BadInput},
		{"alpha", with(func(in *Input) { in.Alpha = 0 }), BadInput},
		{"power", with(func(in *Input) { in.Power = 1 }), BadInput},
		{"alternative", with(func(in *Input) { in.Alternative = 7 }), BadInput},
		{"adjust", with(func(in *Input) { in.Adjust = -1 }), BadInput},
		{"arms", with(func(in *Input) { in.Arms = MaxArms + 1 }), BadInput},
		{"metrics", with(func(in *Input) { in.Metrics = 0 }), BadInput},
		{"daily units", with(func(in *Input) { in.DailyUnits = math.Inf(1) }), BadInput},
		// Two-sided at 0.05: power must exceed 0.05 / 2 = 0.025.
		{"power below alpha/2", with(func(in *Input) { in.Power = 0.025 }), PowerTooLow},
		{"direction", with(func(in *Input) {
			in.Effect = MDE{Text: "-2pp", Value: -0.02, Signed: true}
			in.Alternative = stats.Greater
		}), Direction},
		{"rate", with(func(in *Input) { in.Effect = MDE{Text: "90pp", Value: 0.9} }), RateOutOfRange},
		// 1e-18 relative to 0.1 rounds away: p2 = p1 in floating point.
		{"no effect left", with(func(in *Input) { in.Effect = MDE{Text: "1e-18%", Value: 1e-20, Relative: true} }), NoEffect},
		// n grows as 1/d^2: about 3841 x (0.02 / 1e-11)^2 ~ 1.5e22 units.
		{"effect too small", with(func(in *Input) { in.Effect = MDE{Text: "1e-9pp", Value: 1e-11} }), EffectTooSmall},
		// With 1 unit per arm against 50%, even a treatment at 100% gives
		// z = (1 - 0.5) / sqrt(2 x 0.75 x 0.25) = 0.82 < 1.96.
		{"too few units", Input{Solve: SolveEffect, Baseline: 0.5, UnitsPerArm: 1, Alpha: 0.05, Power: 0.8, Arms: 2, Metrics: 1}, TooFewUnits},
		{"too many units", Input{Solve: SolvePower, Baseline: 0.1, Effect: MDE{Text: "1pp", Value: 0.01}, UnitsPerArm: math.MaxInt64, Alpha: 0.05, Arms: 2, Metrics: 1}, TooManyUnits},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Compute(tc.in)
			var pe *Error
			if !errors.As(err, &pe) || pe.Problem != tc.problem {
				t.Fatalf("Compute: %v; want problem %d", err, tc.problem)
			}
			if pe.Error() == "" {
				t.Error("empty message")
			}
		})
	}
}

func TestSolveNames(t *testing.T) {
	for _, s := range []Solve{SolveUnits, SolveEffect, SolvePower} {
		got, err := ParseSolve(s.String())
		if err != nil || got != s {
			t.Errorf("ParseSolve(%q) = %v, %v", s.String(), got, err)
		}
	}
	if _, err := ParseSolve("days"); err == nil {
		t.Error("ParseSolve(days): no error")
	}
	// The names are those of the JSON plan (common practice: snake_case
	// keys and values).
	if SolveUnits.String() != "units_per_arm" || SolveEffect.String() != "detectable_effect" || SolvePower.String() != "power" {
		t.Errorf("names %v, %v, %v", SolveUnits, SolveEffect, SolvePower)
	}
}

// TestDerivedValuesRoundTrip checks that the values a plan derives from
// short decimal inputs are the float64 nearest to the decimal the
// arithmetic gives by hand, with none of float64's error in the last
// digits (hand arithmetic beside each case; the float64 results without
// rounding are those Go gives for the same operations at run time).
func TestDerivedValuesRoundTrip(t *testing.T) {
	// 4% + 10% of it = 4.4%: 0.04 x 1.1 is 0.044000000000000004 at run
	// time; 4.4 / 100 is 0.044000000000000004 as well.
	r, err := Compute(Input{Solve: SolveUnits, Baseline: 0.04, Effect: mustMDE(t, "10%"), Alpha: 0.05, Power: 0.8, Arms: 3, Metrics: 2, Adjust: stats.Holm})
	if err != nil {
		t.Fatal(err)
	}
	if r.TreatmentRate != 0.044 || r.EffectAbsolute != 0.004 || r.EffectRelative != 0.1 {
		t.Errorf("4%% + 10%%: treatment rate %v, effects %v and %v; want 0.044, 0.004 and 0.1", r.TreatmentRate, r.EffectAbsolute, r.EffectRelative)
	}
	if m := mustMDE(t, "4.4pp"); m.Value != 0.044 {
		t.Errorf("4.4pp is %v, want 0.044", m.Value)
	}
	// 0.07 / 7 = 0.01 (0.010000000000000002 unrounded).
	if a := ComparisonAlpha(0.07, stats.Bonferroni, 7); a != 0.01 {
		t.Errorf("0.07 / 7 = %v, want 0.01", a)
	}
	// c(6) = 1 + 1/2 + ... + 1/6 = 49/20 = 2.45 (2.4499999999999997
	// summed in float64); 1 - 0.95^2 = 0.0975.
	r, err = Compute(Input{Solve: SolveEffect, Baseline: 0.1, UnitsPerArm: 10000, Alpha: 0.05, Power: 0.8, Arms: 7, Metrics: 1, Adjust: stats.BenjaminiYekutieli})
	if err != nil {
		t.Fatal(err)
	}
	if r.Harmonic != 2.45 {
		t.Errorf("c(6) = %v, want 2.45", r.Harmonic)
	}
	r, err = Compute(Input{Solve: SolveEffect, Baseline: 0.1, UnitsPerArm: 10000, Alpha: 0.05, Power: 0.8, Arms: 3, Metrics: 1, Adjust: stats.None})
	if err != nil {
		t.Fatal(err)
	}
	if r.FamilyErrorIndependent != 0.0975 {
		t.Errorf("1 - 0.95^2 = %v, want 0.0975", r.FamilyErrorIndependent)
	}
}
