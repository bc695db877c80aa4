package report

import (
	"strings"
	"testing"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/stats"
)

// TestWarningTexts words each warning code; the texts are the readout's
// fixed wording (common practice for the normal-approximation rule: at
// least 5 conversions and 5 non-conversions, Fleiss, Levin and Paik 2003,
// chapter 2).
func TestWarningTexts(t *testing.T) {
	tests := []struct {
		w    experiment.Warning
		want string
	}{
		{experiment.Warning{Code: experiment.WarnOpenWindowEventLog},
			"the analysis window has no end: maturity is judged against the data freshness, and units exposed shortly before it had little time to convert"},
		{experiment.Warning{Code: experiment.WarnOpenWindowUnitTable},
			"the analysis window has no end: a unit table carries no conversion times, so no unit could be judged immature, and units exposed shortly before the export had little time to convert"},
		{experiment.Warning{Code: experiment.WarnOpenWindowCounts},
			"the analysis window has no end: the counts say which units were immature only if the table has an immature column"},
		{experiment.Warning{Code: experiment.WarnZNoConversions},
			"pooled z statistic undefined: no unit converted in either arm; reported as z = 0, p = 1"},
		{experiment.Warning{Code: experiment.WarnZAllConverted},
			"pooled z statistic undefined: every unit converted in both arms; reported as z = 0, p = 1"},
		{experiment.Warning{Code: experiment.WarnFewConversions, Arm: "control", Count: 1, MinCount: 5},
			"normal approximation not justified: control has 1 conversion, needs at least 5"},
		{experiment.Warning{Code: experiment.WarnFewConversions, Arm: "fast lane", Count: 0, MinCount: 10},
			"normal approximation not justified: fast lane has 0 conversions, needs at least 10"},
		{experiment.Warning{Code: experiment.WarnFewNonConversions, Arm: "b", Count: 4, MinCount: 5},
			"normal approximation not justified: b has 4 non-conversions, needs at least 5"},
		{experiment.Warning{Code: experiment.WarnFewNonConversions, Arm: "b", Count: 1, MinCount: 5},
			"normal approximation not justified: b has 1 non-conversion, needs at least 5"},
		{experiment.Warning{Code: experiment.WarnFewExpectedConversions, Expected: 1050 * 0.002, MinCount: 5},
			"normal approximation not justified: expected conversions n p0 = 2.1, needs at least 5"},
		{experiment.Warning{Code: experiment.WarnFewExpectedNonConversions, Expected: 90 * (1 - 0.995), MinCount: 5},
			"normal approximation not justified: expected non-conversions n (1 - p0) = 0.45, needs at least 5"},
		{experiment.Warning{Code: experiment.WarnRelativeMarginZero},
			"the control has no conversions, so the relative margin is 0"},
		{experiment.Warning{Code: experiment.WarnNonInferiorityUndefined},
			"non-inferiority z statistic undefined: the estimated variance is 0; reported as z = 0, p = 1"},
		{experiment.Warning{Code: experiment.WarnNonInferiorityNoFallback, MinCount: 5},
			"normal approximation not justified (fewer than 5 conversions or non-conversions in an arm); the non-inferiority test has no exact fallback"},
		{experiment.Warning{Code: experiment.WarnStateRecomputed, Reason: "file dt=2026-11-03/part-0.parquet changed since it was read"},
			"every file was read again instead of only the new ones: file dt=2026-11-03/part-0.parquet changed since it was read"},
	}
	seen := map[experiment.WarningCode]bool{}
	for _, tc := range tests {
		if got := warningText(tc.w); got != tc.want {
			t.Errorf("code %d:\ngot  %q\nwant %q", int(tc.w.Code), got, tc.want)
		}
		seen[tc.w.Code] = true
	}
	// Every code has its own words, and the table covers them all.
	texts := map[string]experiment.WarningCode{}
	for c := experiment.WarningCode(1); c.Valid(); c++ {
		text := warningText(experiment.Warning{Code: c, Arm: "a", MinCount: 5})
		if strings.HasPrefix(text, "warning ") {
			t.Errorf("code %d has no text", int(c))
		}
		if prev, dup := texts[text]; dup {
			t.Errorf("codes %d and %d have the same text %q", int(prev), int(c), text)
		}
		texts[text] = c
		if !seen[c] {
			t.Errorf("code %d is not in the table", int(c))
		}
	}
	if experiment.WarningCode(0).Valid() {
		t.Error("the zero code is valid")
	}
}

// TestWarningTextsMatchStats checks the words of the normal-approximation
// warnings against the stats package's own, which the analysis has
// always printed: for a grid of counts, the analysis's typed warnings of
// a comparison and of a target test, worded here, are stats'
// TwoSampleConditionNamed and OneSampleCondition texts, in the same order.
func TestWarningTextsMatchStats(t *testing.T) {
	opts := experiment.DefaultAnalysisOptions()
	for _, tc := range [][4]int64{{0, 10, 3, 7}, {1, 12, 9, 10}, {5, 9, 4, 200}, {30, 30, 0, 1}, {6, 100, 50, 100}, {0, 8, 0, 9}, {8, 8, 9, 9}} {
		x1, n1, x2, n2 := tc[0], tc[1], tc[2], tc[3]
		p0 := 0.03
		spec := experiment.Spec{Control: "ctl", Arms: []string{"ctl", "trt"},
			Metrics: []experiment.Metric{{Name: "m", Events: []string{"m"}, Target: &p0}}}
		tl := experiment.Tally{Arms: []experiment.ArmTally{
			{Name: "ctl", Units: n2, Metrics: []experiment.Count{{Units: n2, Conversions: x2}}},
			{Name: "trt", Units: n1, Metrics: []experiment.Count{{Units: n1, Conversions: x1}}},
		}}
		r, err := experiment.Analyze(spec, tl, opts)
		if err != nil {
			t.Fatal(err)
		}
		c := r.Metrics[0].Comparisons[0]
		_, want := stats.TwoSampleConditionNamed(x1, n1, x2, n2, 5, "trt", "ctl")
		got := warningTexts(c.Warnings)
		if x1+x2 == 0 || x1+x2 == n1+n2 {
			got = got[1:] // the pooled z test's own warning comes first
		}
		if strings.Join(got, "\n") != strings.Join(want, "\n") {
			t.Errorf("%v: comparison warnings\ngot  %q\nwant %q", tc, got, want)
		}
		for _, a := range r.Metrics[0].Arms {
			_, want := stats.OneSampleCondition(a.Units, p0, 5)
			if got := warningTexts(a.TargetTest.Warnings); strings.Join(got, "\n") != strings.Join(want, "\n") {
				t.Errorf("%v, arm %s: target warnings\ngot  %q\nwant %q", tc, a.Arm, got, want)
			}
		}
	}
}

// TestSegmentCaution checks the caution on segment results: 6 tests at
// alpha 0.05 expect 0.30 false positives when nothing works (6 x 0.05,
// common practice), 1 test at alpha 0.01 expects 0.01 and takes the singular, and a readout without
// segment dimensions has none.
func TestSegmentCaution(t *testing.T) {
	r := twoArmReadout()
	if got := segmentCaution(r); !strings.Contains(got, "6 segment comparisons, each at alpha 0.05") || !strings.Contains(got, "about 0.30 of them") {
		t.Errorf("caution %q", got)
	}
	r.Segmentation.Tests = 1
	r.Settings.Alpha = 0.01
	if got := segmentCaution(r); !strings.Contains(got, "1 segment comparison, each at alpha 0.01") || !strings.Contains(got, "about 0.01 of them") {
		t.Errorf("caution %q", got)
	}
	r.Segmentation.Dimensions = nil
	if got := segmentCaution(r); got != "" {
		t.Errorf("caution without segments %q", got)
	}
}
