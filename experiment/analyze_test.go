package experiment

import (
	"fmt"
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
// reference values of experiment/REFERENCE-VALUES.md.
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
	// P2-01 z: R 4.2.2 prop.test(correct=FALSE), via
	// experiment/REFERENCE-VALUES.md.
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
	wantWarn := Warning{Code: WarnFewConversions, Arm: "control", Count: 0, MinCount: 5}
	if len(rare.Warnings) != 1 || rare.Warnings[0] != wantWarn {
		t.Errorf("P2-04 warnings = %+v, want [%+v]", rare.Warnings, wantWarn)
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
// prop.test, experiment/REFERENCE-VALUES.md) and a 90% Newcombe interval
// above 0.
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

// threeArmTally builds a tally of control, t1 and t2 with per-metric
// (conversions, units).
func threeArmTally(ctl, t1, t2 [][2]int64) Tally {
	tl := twoArmTally(ctl, t1)
	t2t := twoArmTally(t2, t2).Arms[0]
	t2t.Name = "t2"
	tl.Arms[1].Name = "t1"
	tl.Arms = append(tl.Arms, t2t)
	return tl
}

// TestAnalyzeAdjustment checks the multiple-comparison adjustment over
// two metrics x two treatments. Check values: R 4.2.2, p-values of
// prop.test(correct = FALSE) adjusted by p.adjust (script in the comment
// of each value's source below).
//
//	p <- c(prop.test(c(1090, 1000), c(10000, 10000), correct = FALSE)$p.value,
//	       prop.test(c(1040, 1000), c(10000, 10000), correct = FALSE)$p.value,
//	       prop.test(c(455, 400), c(10000, 10000), correct = FALSE)$p.value,
//	       prop.test(c(390, 400), c(10000, 10000), correct = FALSE)$p.value)
//	p.adjust(p, "holm"); p.adjust(p, "bonferroni"); p.adjust(p, "BH")
func TestAnalyzeAdjustment(t *testing.T) {
	spec := spec2()
	spec.Arms = []string{"control", "t1", "t2"}
	spec.Metrics = []Metric{{Name: "a", Events: []string{"a"}}, {Name: "b", Events: []string{"b"}}}
	tl := threeArmTally(
		[][2]int64{{1000, 10000}, {400, 10000}},
		[][2]int64{{1090, 10000}, {455, 10000}},
		[][2]int64{{1040, 10000}, {390, 10000}})
	raw := []float64{0.037493369762011466, 0.35001560005821486, 0.054542541856504277, 0.71658543757779569}
	cases := []struct {
		method stats.AdjustMethod
		want   []float64
		rate   string
	}{
		{stats.Holm, []float64{0.14997347904804587, 0.70003120011642972, 0.16362762556951282, 0.71658543757779569}, "family-wise error rate"},
		{stats.Bonferroni, []float64{0.14997347904804587, 1, 0.21817016742601711, 1}, "family-wise error rate"},
		{stats.BenjaminiHochberg, []float64{0.10908508371300855, 0.46668746674428646, 0.10908508371300855, 0.71658543757779569}, "false discovery rate"},
		{stats.None, raw, "per comparison"},
	}
	for _, tc := range cases {
		opts := DefaultAnalysisOptions()
		opts.Adjust = tc.method
		r, err := Analyze(spec, tl, opts)
		if err != nil {
			t.Fatal(err)
		}
		if r.Multiplicity.Size != 4 || r.Multiplicity.Method != tc.method.String() || r.Multiplicity.ErrorRate != tc.rate {
			t.Errorf("%v: multiplicity %+v", tc.method, r.Multiplicity)
		}
		i := 0
		for _, m := range r.Metrics {
			for _, c := range m.Comparisons {
				near(t, fmt.Sprintf("%v raw p %d", tc.method, i), c.Z.PValue, raw[i], 1e-10)
				near(t, fmt.Sprintf("%v adjusted p %d", tc.method, i), c.Adjusted.PValue, tc.want[i], 1e-10)
				if c.Significant != (tc.want[i] <= 0.05) || c.SignificantUnadjusted != (raw[i] <= 0.05) {
					t.Errorf("%v comparison %d: significant %v, unadjusted %v", tc.method, i, c.Significant, c.SignificantUnadjusted)
				}
				if (c.Adjusted.DifferenceInterval != nil) != (tc.method == stats.Bonferroni) {
					t.Errorf("%v comparison %d: simultaneous interval %+v", tc.method, i, c.Adjusted.DifferenceInterval)
				}
				i++
			}
		}
		if tc.method == stats.Bonferroni {
			// R 4.2.2: Newcombe method 10 at level 1 - 0.05/4 from
			// prop.test(x, n, conf.level = 0.9875, correct = FALSE) limits.
			iv := r.Metrics[0].Comparisons[0].Adjusted.DifferenceInterval
			near(t, "Bonferroni lower", iv.Lower, -0.0018096178267804838, 1e-9)
			near(t, "Bonferroni upper", iv.Upper, 0.019814928444144723, 1e-9)
			near(t, "Bonferroni level", iv.Level, 0.9875, 1e-15)
		}
	}
}

// TestAnalyzeGuardrail checks the non-inferiority test of a guardrail against
// NI-01 of experiment/REFERENCE-VALUES.md: treatment 1180/10000 vs control
// 1200/10000, margin 0.01; Farrington-Manning z = 1.7463701392443087,
// p = 0.04037332761886865 (R 4.2.2 formula, = mpmath 40 digits).
func TestAnalyzeGuardrail(t *testing.T) {
	const z, p = 1.7463701392443087, 0.04037332761886865
	cases := []struct {
		name          string
		margin        Margin
		lowerIsBetter bool
		ctl, trt      int64
	}{
		{"absolute margin", Margin{Value: 0.01}, false, 1200, 1180},
		// 0.01 / 0.12 of the control's rate 0.12 is the same margin.
		{"relative margin", Margin{Value: 0.01 / 0.12, Relative: true}, false, 1200, 1180},
		// Lower is better: the treatment's 1200 against the control's
		// 1180 is NI-01 with the arms swapped.
		{"lower is better", Margin{Value: 0.01}, true, 1180, 1200},
	}
	for _, tc := range cases {
		spec := spec2()
		spec.Metrics = []Metric{
			{Name: "main", Events: []string{"main"}},
			{Name: "guard", Events: []string{"guard"}, Guardrail: &tc.margin, LowerIsBetter: tc.lowerIsBetter},
		}
		tl := twoArmTally([][2]int64{{500, 10000}, {tc.ctl, 10000}}, [][2]int64{{560, 10000}, {tc.trt, 10000}})
		r, err := Analyze(spec, tl, DefaultAnalysisOptions())
		if err != nil {
			t.Fatal(err)
		}
		c := r.Metrics[1].Comparisons[0]
		ni := c.NonInferiority
		if ni == nil {
			t.Fatalf("%s: no non-inferiority test", tc.name)
		}
		near(t, tc.name+" margin", ni.AbsoluteMargin, 0.01, 1e-12)
		// Lower is better: the same test reported as "less" on the
		// treatment-minus-control scale, so the statistic changes sign.
		wantZ, wantAlt := z, "greater"
		if tc.lowerIsBetter {
			wantZ, wantAlt = -z, "less"
		}
		near(t, tc.name+" z", ni.Z.Statistic, wantZ, 1e-9)
		near(t, tc.name+" p", ni.Z.PValue, p, 1e-9)
		if !ni.NonInferior || ni.Z.Alternative != wantAlt || ni.Z.Method != "non-inferiority z test (Farrington-Manning score)" ||
			ni.Z.RejectByStatistic != ni.Z.RejectByPValue {
			t.Errorf("%s: %+v", tc.name, ni.Z)
		}
		if c.Adjusted != nil || r.Multiplicity.Size != 1 {
			t.Errorf("%s: guardrail comparison in the family (size %d)", tc.name, r.Multiplicity.Size)
		}
		if r.Metrics[1].Guardrail == nil || r.Metrics[1].LowerIsBetter != tc.lowerIsBetter {
			t.Errorf("%s: metric readout %+v", tc.name, r.Metrics[1])
		}
	}
}

// TestAnalyzeIntervalChoice checks the interval options against CI-01
// (81/263): Clopper-Pearson [0.252737, 0.367622] from R 4.2.2
// binom.test(81, 263)$conf.int, and the level of one-sided readouts.
func TestAnalyzeIntervalChoice(t *testing.T) {
	spec := spec2()
	opts := DefaultAnalysisOptions()
	opts.Interval = IntervalClopperPearson
	opts.Difference = DifferenceWald
	// P2-01: Wald interval of 56/70 vs 48/80 from R 4.2.2 prop.test
	// (correct = FALSE): [0.05750489914903717, 0.34249510085096296].
	tl := twoArmTally([][2]int64{{48, 80}}, [][2]int64{{81, 263}})
	r, err := Analyze(spec, tl, opts)
	if err != nil {
		t.Fatal(err)
	}
	iv := r.Metrics[0].Arms[1].Interval
	near(t, "CI-01 Clopper-Pearson lower", iv.Lower, 0.252737, 5e-6)
	near(t, "CI-01 Clopper-Pearson upper", iv.Upper, 0.367622, 5e-6)
	if r.Settings.IntervalMethod != "Clopper-Pearson exact" || r.Settings.DifferenceIntervalMethod != "Wald (unpooled)" {
		t.Errorf("settings %+v", r.Settings)
	}
	tl = twoArmTally([][2]int64{{48, 80}}, [][2]int64{{56, 70}})
	r, err = Analyze(spec, tl, opts)
	if err != nil {
		t.Fatal(err)
	}
	d := r.Metrics[0].Comparisons[0].DifferenceInterval
	near(t, "P2-01 Wald lower", d.Lower, 0.05750489914903717, 1e-12)
	near(t, "P2-01 Wald upper", d.Upper, 0.34249510085096296, 1e-12)

	opts = DefaultAnalysisOptions()
	opts.Stats.Alternative = stats.Less
	r, err = Analyze(spec, tl, opts)
	if err != nil {
		t.Fatal(err)
	}
	// Common practice: a one-sided test at alpha matches the two-sided
	// interval at 1 - 2 alpha.
	if r.Settings.ConfidenceLevel != 0.9 || r.Metrics[0].Comparisons[0].DifferenceInterval.Level != 0.9 {
		t.Errorf("one-sided level %v", r.Settings.ConfidenceLevel)
	}
	opts.Interval = IntervalMethod(9)
	if _, err := Analyze(spec, tl, opts); err == nil {
		t.Error("unknown interval method accepted")
	}
}
