// The words of the analysis's warnings and of the segment caution: the
// analysis raises them as codes and numbers, the readout prints them here.

package report

import (
	"fmt"

	"github.com/armtally/armtally/experiment"
)

// warningText words one warning of the analysis.
func warningText(w experiment.Warning) string {
	notJustified := "normal approximation not justified: "
	switch w.Code {
	case experiment.WarnOpenWindowEventLog:
		return "the analysis window has no end: maturity is judged against the data freshness, and units exposed shortly before it had little time to convert"
	case experiment.WarnOpenWindowUnitTable:
		return "the analysis window has no end: a unit table carries no conversion times, so no unit could be judged immature, and units exposed shortly before the export had little time to convert"
	case experiment.WarnOpenWindowCounts:
		return "the analysis window has no end: the counts say which units were immature only if the table has an immature column"
	case experiment.WarnZNoConversions:
		return "pooled z statistic undefined: no unit converted in either arm; reported as z = 0, p = 1"
	case experiment.WarnZAllConverted:
		return "pooled z statistic undefined: every unit converted in both arms; reported as z = 0, p = 1"
	case experiment.WarnFewConversions:
		return fmt.Sprintf("%s%s has %s, needs at least %d", notJustified, w.Arm,
			Plural(w.Count, "conversion", "conversions"), w.MinCount)
	case experiment.WarnFewNonConversions:
		return fmt.Sprintf("%s%s has %s, needs at least %d", notJustified, w.Arm,
			Plural(w.Count, "non-conversion", "non-conversions"), w.MinCount)
	case experiment.WarnFewExpectedConversions:
		return fmt.Sprintf("%sexpected conversions n p0 = %.4g, needs at least %d", notJustified, w.Expected, w.MinCount)
	case experiment.WarnFewExpectedNonConversions:
		return fmt.Sprintf("%sexpected non-conversions n (1 - p0) = %.4g, needs at least %d", notJustified, w.Expected, w.MinCount)
	case experiment.WarnRelativeMarginZero:
		return "the control has no conversions, so the relative margin is 0"
	case experiment.WarnNonInferiorityUndefined:
		return "non-inferiority z statistic undefined: the estimated variance is 0; reported as z = 0, p = 1"
	case experiment.WarnNonInferiorityNoFallback:
		return fmt.Sprintf("normal approximation not justified (fewer than %d conversions or non-conversions in an arm); the non-inferiority test has no exact fallback", w.MinCount)
	case experiment.WarnStateRecomputed:
		return "every file was read again instead of only the new ones: " + w.Reason
	}
	return fmt.Sprintf("warning %d", int(w.Code))
}

// warningTexts words warnings, in order.
func warningTexts(ws []experiment.Warning) []string {
	return convertAll(ws, warningText)
}

// segmentCaution says what the segment results of r can and cannot show;
// "" when r has no segment breakdown.
func segmentCaution(r experiment.Readout) string {
	sg := r.Segmentation
	if len(sg.Dimensions) == 0 {
		return ""
	}
	alpha := r.Settings.Alpha
	return fmt.Sprintf("Segment results are exploratory: %s, each at alpha %s without adjustment, outside the multiple-comparison family. "+
		"With no true effect anywhere, about %s of them would still come out significant by chance; treat a segment difference as a lead for a new experiment, not as a finding.",
		Plural(int64(sg.Tests), "segment comparison", "segment comparisons"), formatAlpha(alpha), formatExpected(alpha*float64(sg.Tests)))
}
