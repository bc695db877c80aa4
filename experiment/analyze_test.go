package experiment

import (
	"math"
	"strings"
	"testing"

	"github.com/armtally/armtally/experiment/stats"
)

// twoArmTally builds a tally of a control and a treatment arm with the
// given per-metric counts (conversions, units), control first.
func twoArmTally(ctl, trt [][2]int64) Tally {
	arm := func(name string, c [][2]int64) ArmTally {
		a := ArmTally{Name: name}
		for _, xn := range c {
			a.Metrics = append(a.Metrics, Count{Conversions: xn[0], Units: xn[1]})
			a.Units = max(a.Units, xn[1])
		}
		a.Exposed = a.Units
		return a
	}
	return Tally{Arms: []ArmTally{arm("control", ctl), arm("treat", trt)}}
}

func near(t *testing.T, what string, got, want, rel float64) {
	t.Helper()
	if math.Abs(got-want) > rel*math.Abs(want)+1e-15 {
		t.Errorf("%s = %.17g, want %.17g (rel %g)", what, got, want, rel)
	}
}

// TestAnalyzeComparison checks the comparison of two arms against the
// reference values of REFERENCE-VALUES.md.
func TestAnalyzeComparison(t *testing.T) {
	spec := spec2()
	spec.Metrics = []Metric{
		{Name: "buy", Events: []string{"buy"}},
		{Name: "rare", Events: []string{"rare"}},
	}
	// buy: case P2-01, treatment 56/70 vs control 48/80.
	// rare: case P2-04, treatment 5/56 vs control 0/29.
	tl := twoArmTally([][2]int64{{48, 80}, {0, 29}}, [][2]int64{{56, 70}, {5, 56}})
	r, err := Analyze(spec, tl, DefaultAnalysisOptions())
	if err != nil {
		t.Fatal(err)
	}
	buy := r.Metrics[0].Comparisons[0]
	if buy.Treatment != "treat" || buy.Control != "control" {
		t.Fatalf("comparison %s vs %s", buy.Treatment, buy.Control)
	}
	// P2-01 z: R 4.2.2 prop.test(correct=FALSE), via REFERENCE-VALUES.md.
	near(t, "P2-01 z", buy.Z.Statistic, 2.650171951258533, 1e-12)
	// P2-01 p two-sided: R 4.2.2 prop.test(correct=FALSE)$p.value.
	near(t, "P2-01 p", buy.Z.PValue, 0.008045081368196564, 1e-10)
	// P2-01 Newcombe: R 4.2.2, Newcombe (1998) method 10.
	near(t, "P2-01 Newcombe lower", buy.DifferenceInterval.Lower, 0.052431472402364926, 1e-12)
	near(t, "P2-01 Newcombe upper", buy.DifferenceInterval.Upper, 0.33387265403690586, 1e-12)
	// P2-01 p1/p2 = 1.3333333333333335 (SciPy 1.10.1 relative_risk), so
	// the lift is 1/3; Katz interval of p1/p2 from epitools 0.5.10.1
	// riskratio.wald [1.076626422763193, 1.651248511266387], minus 1.
	near(t, "P2-01 lift", *buy.RelativeLift, 1.3333333333333335-1, 1e-12)
	near(t, "P2-01 Katz lower", buy.LiftInterval.Lower, 1.076626422763193-1, 1e-11)
	near(t, "P2-01 Katz upper", buy.LiftInterval.Upper, 1.651248511266387-1, 1e-11)
	if !buy.ConditionMet || buy.DecidedBy != DecidedByZ || !buy.Significant || !buy.IntervalAgrees || buy.Exact != nil {
		t.Errorf("P2-01 decision: %+v", buy)
	}
	if !buy.Z.RejectByStatistic || !buy.Z.RejectByPValue {
		t.Errorf("P2-01: both routes should reject at 0.05: %+v", buy.Z)
	}

	rare := r.Metrics[1].Comparisons[0]
	// P2-04 z: R 4.2.2 prop.test(correct=FALSE); reported but not relied on.
	near(t, "P2-04 z", rare.Z.Statistic, 1.6586488692392285, 1e-12)
	// FE-04 [[5, 51], [0, 29]]: R 4.2.2 fisher.test two-sided p.
	if rare.Exact == nil {
		t.Fatal("P2-04: no exact test although control has 0 conversions")
	}
	near(t, "FE-04 p", rare.Exact.PValue, 0.16062144320947117, 1e-9)
	if rare.ConditionMet || rare.DecidedBy != DecidedByExact || rare.Significant {
		t.Errorf("P2-04 decision: %+v", rare)
	}
	// P2-04: p1/p2 undefined (+Inf in SciPy); the lift is not estimable.
	if rare.RelativeLift != nil || rare.LiftInterval != nil {
		t.Errorf("P2-04 lift should be undefined: %v %v", rare.RelativeLift, rare.LiftInterval)
	}
	near(t, "P2-04 Newcombe lower", rare.DifferenceInterval.Lower, -0.03813714790353685, 1e-12)
	near(t, "P2-04 Newcombe upper", rare.DifferenceInterval.Upper, 0.19256001385511157, 1e-12)
	wantWarn := "normal approximation not justified: control has 0 conversions, needs at least 5"
	if len(rare.Warnings) != 1 || rare.Warnings[0] != wantWarn {
		t.Errorf("P2-04 warnings = %q, want [%q]", rare.Warnings, wantWarn)
	}

	// Per-arm Wilson: CI-01 is 81/263; here check the arm rates are the
	// plain ratios and every interval carries its method.
	for _, m := range r.Metrics {
		for _, a := range m.Arms {
			if a.Rate == nil || *a.Rate != float64(a.Conversions)/float64(a.Units) || a.Interval.Method != "Wilson score" {
				t.Errorf("%s/%s: rate %v interval %+v", m.Name, a.Arm, a.Rate, a.Interval)
			}
		}
	}
}

// TestAnalyzeWilson checks the per-arm interval against CI-01.
func TestAnalyzeWilson(t *testing.T) {
	spec := spec2()
	tl := twoArmTally([][2]int64{{81, 263}}, [][2]int64{{0, 20}})
	r, err := Analyze(spec, tl, DefaultAnalysisOptions())
	if err != nil {
		t.Fatal(err)
	}
	ctl, trt := r.Metrics[0].Arms[0], r.Metrics[0].Arms[1]
	// CI-01 81/263: R 4.2.2 prop.test(correct=FALSE)$conf.int; published
	// [0.2553, 0.3662] in Newcombe (1998) Table I (from memory).
	near(t, "CI-01 lower", ctl.Interval.Lower, 0.255289, 5e-6)
	near(t, "CI-01 upper", ctl.Interval.Upper, 0.366210, 5e-6)
	// CI-02 0/20: [0, 0.161125] (R 4.2.2 prop.test).
	near(t, "CI-02 lower", trt.Interval.Lower, 0, 0)
	near(t, "CI-02 upper", trt.Interval.Upper, 0.161125, 5e-6)
}

// TestAnalyzeTarget checks the tests against a target rate.
func TestAnalyzeTarget(t *testing.T) {
	spec := spec2()
	p12, p05 := 0.12, 0.05
	spec.Metrics = []Metric{
		{Name: "signup", Events: []string{"signup"}, Target: &p12},
		{Name: "trial", Events: []string{"trial"}, Target: &p05},
	}
	tl := twoArmTally([][2]int64{{96, 1000}, {96, 1000}}, [][2]int64{{96, 1000}, {3, 20}})
	r, err := Analyze(spec, tl, DefaultAnalysisOptions())
	if err != nil {
		t.Fatal(err)
	}
	// P1Z-02: x = 96, n = 1000, p0 = 0.12; R 4.2.2 prop.test(correct=FALSE).
	tt := r.Metrics[0].Arms[0].TargetTest
	near(t, "P1Z-02 z", tt.Z.Statistic, -2.335496832484569, 1e-12)
	near(t, "P1Z-02 p", tt.Z.PValue, 0.019517481182177762, 1e-10)
	if !tt.ConditionMet || tt.DecidedBy != DecidedByZ || !tt.Significant || tt.Exact != nil {
		t.Errorf("P1Z-02 decision: %+v", tt)
	}
	// BT-02: x = 3, n = 20, p0 = 0.05; n p0 = 1 < 5, so the exact binomial
	// test decides; R 4.2.2 binom.test two-sided p.
	tt = r.Metrics[1].Arms[1].TargetTest
	if tt.Exact == nil {
		t.Fatal("BT-02: no exact test")
	}
	near(t, "BT-02 p", tt.Exact.PValue, 0.07548367378849637, 1e-9)
	if tt.ConditionMet || tt.DecidedBy != DecidedByExact || tt.Significant {
		t.Errorf("BT-02 decision: %+v", tt)
	}
}

// TestAnalyzeSampleRatio checks the sample ratio check against SRM-02
// and SRM-04 and the planned split.
func TestAnalyzeSampleRatio(t *testing.T) {
	cases := []struct {
		name     string
		units    [2]int64
		split    []float64
		x2, p    float64
		mismatch bool
	}{
		// SRM-02: R 4.2.2 chisq.test(c(50600, 49400), p = c(.5, .5)).
		{"SRM-02", [2]int64{50600, 49400}, nil, 14.4, 0.00014780231033445406, true},
		// SRM-04: R 4.2.2 chisq.test(c(9040, 960), p = c(.9, .1)); the
		// shares are given unnormalised (90:10) on purpose.
		{"SRM-04", [2]int64{9040, 960}, []float64{90, 10}, 1.777777777777778, 0.1824224394517358, false},
	}
	for _, tc := range cases {
		spec := spec2()
		spec.Split = tc.split
		tl := twoArmTally([][2]int64{{1, tc.units[0]}}, [][2]int64{{1, tc.units[1]}})
		r, err := Analyze(spec, tl, DefaultAnalysisOptions())
		if err != nil {
			t.Fatal(err)
		}
		sr := r.SampleRatio
		near(t, tc.name+" X2", sr.Statistic, tc.x2, 1e-12)
		near(t, tc.name+" p", sr.PValue, tc.p, 1e-9)
		if sr.DF != 1 || !sr.Checked || sr.Mismatch != tc.mismatch {
			t.Errorf("%s: %+v", tc.name, sr)
		}
	}
}

// TestAnalyzeUndefined checks that arms without units give nil values, not
// NaN, and that an unplanned arm is an error.
func TestAnalyzeUndefined(t *testing.T) {
	spec := spec2()
	r, err := Analyze(spec, Tally{}, DefaultAnalysisOptions())
	if err != nil {
		t.Fatal(err)
	}
	if len(r.Arms) != 1 || r.Arms[0].Name != "control" || r.SampleRatio.Checked {
		t.Errorf("empty tally: arms %+v, sample ratio %+v", r.Arms, r.SampleRatio)
	}
	if a := r.Metrics[0].Arms[0]; a.Rate != nil || a.Interval != nil {
		t.Errorf("empty arm has a rate: %+v", a)
	}

	tl := twoArmTally([][2]int64{{0, 10}}, [][2]int64{{0, 0}})
	r, err = Analyze(spec, tl, DefaultAnalysisOptions())
	if err != nil {
		t.Fatal(err)
	}
	c := r.Metrics[0].Comparisons[0]
	if c.Z != nil || c.Difference != nil || !c.IntervalAgrees {
		t.Errorf("comparison with an empty arm: %+v", c)
	}

	tl.Arms[1].Name = "surprise"
	if _, err := Analyze(spec, tl, DefaultAnalysisOptions()); err == nil || !strings.Contains(err.Error(), `"surprise"`) {
		t.Errorf("unplanned arm: error = %v", err)
	}
}

// TestAnalyzeOneSidedAgreement checks the interval-test agreement for a
// one-sided alternative: P2-01 with "greater" has p = 0.0040 (R 4.2.2
// prop.test, REFERENCE-VALUES.md) and a 90% Newcombe interval above 0.
func TestAnalyzeOneSidedAgreement(t *testing.T) {
	spec := spec2()
	opts := DefaultAnalysisOptions()
	opts.Stats.Alternative = stats.Greater
	tl := twoArmTally([][2]int64{{48, 80}}, [][2]int64{{56, 70}})
	r, err := Analyze(spec, tl, opts)
	if err != nil {
		t.Fatal(err)
	}
	c := r.Metrics[0].Comparisons[0]
	near(t, "P2-01 p greater", c.Z.PValue, 0.0040225406840982865, 1e-10)
	if !c.Significant || !c.IntervalAgrees || c.Z.Alternative != "greater" {
		t.Errorf("one-sided: %+v", c)
	}
}

// TestAnalyzeControlFirst checks that an unlisted control leads the arms
// even when another arm was exposed first.
func TestAnalyzeControlFirst(t *testing.T) {
	spec := spec2()
	spec.Arms = nil
	tl := twoArmTally([][2]int64{{5, 50}}, [][2]int64{{6, 50}})
	tl.Arms[0], tl.Arms[1] = tl.Arms[1], tl.Arms[0]
	r, err := Analyze(spec, tl, DefaultAnalysisOptions())
	if err != nil {
		t.Fatal(err)
	}
	if r.Arms[0].Name != "control" || r.Metrics[0].Arms[0].Arm != "control" || r.Metrics[0].Comparisons[0].Treatment != "treat" {
		t.Errorf("arms %+v", r.Arms)
	}
}
