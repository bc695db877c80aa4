// The warnings of a readout, computed once for both writers: each has a
// stable code and a text, worded in Markdown for the Markdown readout
// and in plain text for the JSON one.

package report

import (
	"fmt"
	"strings"

	"github.com/armtally/armtally/experiment"
)

// Notice is one warning a readout shows: a stable snake_case code (the
// Notice* and warning-code constants) and its text. Metric names the
// metric the warning is about; "" for the readout as a whole.
type Notice struct {
	Code   string
	Text   string
	Metric string
}

// Codes of the notices the numbers show (the analysis's own warnings have
// the codes of warningCodes).
const (
	NoticeSampleRatioMismatch      = "sample_ratio_mismatch"
	NoticeSampleRatioNotChecked    = "sample_ratio_not_checked"
	NoticeArmWithoutUnits          = "arm_without_units"
	NoticeMultiArmUnits            = "multi_arm_units"
	NoticeTiedUnits                = "tied_units"
	NoticeImmatureExcluded         = "immature_units_excluded"
	NoticeImmatureIncluded         = "immature_units_included"
	NoticeGuardrailNotTested       = "guardrail_not_tested"
	NoticeGuardrailNotMet          = "guardrail_not_met"
	NoticeApproximationUnjustified = "normal_approximation_not_justified"
	NoticeIntervalTestDisagree     = "interval_test_disagree"
	NoticeRoutesDisagree           = "test_routes_disagree"
)

// warningCodes are the codes of the analysis's warnings.
var warningCodes = map[experiment.WarningCode]string{
	experiment.WarnOpenWindowEventLog:        "open_window_event_log",
	experiment.WarnOpenWindowUnitTable:       "open_window_unit_table",
	experiment.WarnOpenWindowCounts:          "open_window_counts",
	experiment.WarnZNoConversions:            "z_no_conversions",
	experiment.WarnZAllConverted:             "z_all_converted",
	experiment.WarnFewConversions:            "few_conversions",
	experiment.WarnFewNonConversions:         "few_non_conversions",
	experiment.WarnFewExpectedConversions:    "few_expected_conversions",
	experiment.WarnFewExpectedNonConversions: "few_expected_non_conversions",
	experiment.WarnRelativeMarginZero:        "relative_margin_zero",
	experiment.WarnNonInferiorityUndefined:   "non_inferiority_undefined",
	experiment.WarnNonInferiorityNoFallback:  "non_inferiority_no_fallback",
	experiment.WarnStateRecomputed:           "state_recomputed",
}

// WarningCode returns the stable code of one of the analysis's warnings,
// as the JSON readout writes it (the history stores it too).
func WarningCode(c experiment.WarningCode) string {
	return warningCode(c)
}

// warningCode is the code of one of the analysis's warnings.
func warningCode(c experiment.WarningCode) string {
	if s, ok := warningCodes[c]; ok {
		return s
	}
	return fmt.Sprintf("warning_%d", int(c))
}

// noticeStyle says how a notice writes a name from the data and an
// emphasis: Markdown code spans and bold, or plain text for JSON (where
// jsonText makes the whole text safe).
type noticeStyle struct {
	name   func(string) string
	strong func(string) string
}

var (
	markdownNotices = noticeStyle{name: code, strong: func(s string) string { return "**" + s + "**" }}
	plainNotices    = noticeStyle{
		name: func(s string) string {
			if s == "" {
				return "(empty)"
			}
			return s
		},
		strong: func(s string) string { return s },
	}
)

func (st noticeStyle) pair(c experiment.Comparison) string {
	return st.name(c.Treatment) + " vs " + st.name(c.Control)
}

// readoutNotices lists the warnings of a readout, in the order the
// Markdown's Warnings block shows them, without repeats: the sample ratio
// check, arms without units, excluded and immature units, then per metric
// the guardrails not met, the approximations not justified and the
// disagreements between routes, then the analysis's readout-wide
// warnings.
func readoutNotices(r experiment.Readout, st noticeStyle) []Notice {
	var list []Notice
	add := func(code, metric, format string, args ...any) {
		list = append(list, Notice{Code: code, Metric: metric, Text: fmt.Sprintf(format, args...)})
	}
	sr := r.SampleRatio
	switch {
	case sr.Checked && sr.Mismatch:
		add(NoticeSampleRatioMismatch, "", "%s: units per arm are off the planned split (%s). Assignment or logging may be broken; find the cause before trusting any result below.",
			st.strong("Sample ratio mismatch"), pAgainstStrict(sr.PValue, sr.Threshold))
	case !sr.Checked:
		add(NoticeSampleRatioNotChecked, "", "Sample ratio not checked: fewer than two arms have units.")
	}
	for _, a := range r.Arms {
		if a.Units == 0 {
			add(NoticeArmWithoutUnits, "", "Arm %s has no units.", st.name(a.Name))
		}
	}
	d := r.Diagnostics
	if d.MultiArmUnits > 0 {
		what := "left out of every metric (multi-arm policy exclude)"
		if r.Settings.MultiArmPolicy == "first" {
			what = "kept in the arm of their first exposure (multi-arm policy first)"
		}
		add(NoticeMultiArmUnits, "", "%s %s exposed to more than one arm and %s.", FormatCount(d.MultiArmUnits), unitsWere(d.MultiArmUnits), what)
	}
	if d.TiedUnits > 0 {
		add(NoticeTiedUnits, "", "%s %s first exposed to two arms at the same instant and left out.", FormatCount(d.TiedUnits), unitsWere(d.TiedUnits))
	}
	for _, im := range d.Immature {
		switch {
		case im.Units == 0:
		case r.Settings.MaturityPolicy == "include":
			add(NoticeImmatureIncluded, im.Metric, "%s: %s %s counted before their attribution window closed; their conversions may still come.", st.name(im.Metric), FormatCount(im.Units), unitsWere(im.Units))
		default:
			add(NoticeImmatureExcluded, im.Metric, "%s: %s %s left out because their attribution window had not closed.", st.name(im.Metric), FormatCount(im.Units), unitsWere(im.Units))
		}
	}
	for _, m := range r.Metrics {
		list = append(list, metricNotices(m, st)...)
	}
	for _, w := range r.Warnings {
		list = append(list, Notice{Code: warningCode(w.Code), Text: warningText(w)})
	}
	return dedupeNotices(list)
}

// metricNotices lists one metric's warnings for the readout's Warnings
// block: its guardrail tests that did not pass, the tests whose normal
// approximation is not justified (grouped by what decided instead), and
// the disagreements of intervals and routes.
func metricNotices(m experiment.MetricReadout, st noticeStyle) []Notice {
	list := guardrailNotices(m, st)
	var notMet groups
	var other []Notice
	name := st.name(m.Name)
	for _, c := range m.Comparisons {
		pair := st.pair(c)
		if !c.ConditionMet && testRun(c.Z, c.Exact) {
			notMet.add(exactFallback(c.Exact), pair)
		}
		if !c.IntervalAgrees {
			other = append(other, Notice{NoticeIntervalTestDisagree, name + ", " + pair + ": " + disagreement(c) + ".", m.Name})
		}
		if c.Z != nil && c.Z.RejectByStatistic != c.Z.RejectByPValue {
			other = append(other, Notice{NoticeRoutesDisagree, name + ", " + pair + ": " + routesDisagree, m.Name})
		}
	}
	for _, a := range m.Arms {
		tt := a.TargetTest
		if tt == nil {
			continue
		}
		what := st.name(a.Arm) + " vs target " + formatPercent(tt.Target)
		if !tt.ConditionMet && testRun(tt.Z, tt.Exact) {
			notMet.add(exactFallback(tt.Exact), what)
		}
		if tt.Z != nil && tt.Z.RejectByStatistic != tt.Z.RejectByPValue {
			other = append(other, Notice{NoticeRoutesDisagree, name + ", " + what + ": " + routesDisagree, m.Name})
		}
	}
	for _, g := range notMet {
		list = append(list, Notice{NoticeApproximationUnjustified,
			fmt.Sprintf("%s: normal approximation not justified for %s; %s.", name, strings.Join(g.members, ", "), g.key), m.Name})
	}
	return append(list, other...)
}

// guardrailNotices lists the guardrail tests of a metric that did not
// pass, and any whose two routes disagree.
func guardrailNotices(m experiment.MetricReadout, st noticeStyle) []Notice {
	if m.Guardrail == nil {
		return nil
	}
	var list []Notice
	change, _ := worseWord(m)
	for _, c := range m.Comparisons {
		pair := st.pair(c)
		ni := c.NonInferiority
		switch {
		case ni == nil || ni.Z == nil:
			list = append(list, Notice{NoticeGuardrailNotTested, fmt.Sprintf("%s: %s, %s could not be tested against its margin.",
				st.strong("Guardrail not tested"), st.name(m.Name), pair), m.Name})
		case !ni.NonInferior:
			s := fmt.Sprintf("%s: %s, %s is not shown to be within the margin: a %s of %s pp or more is not ruled out (non-inferiority %s",
				st.strong("Guardrail not met"), st.name(m.Name), pair, change, formatSize(ni.AbsoluteMargin), pAgainst(ni.Z.PValue, ni.Z.Alpha))
			if chk, ok := checkInterval(m, ni); ok {
				s += fmt.Sprintf("; the %s interval reaches %s pp", formatLevel(ni.Interval.Level), formatPoints(chk.bound))
			}
			list = append(list, Notice{NoticeGuardrailNotMet, s + ").", m.Name})
		}
		if ni != nil && ni.Z != nil && ni.Z.RejectByStatistic != ni.Z.RejectByPValue {
			list = append(list, Notice{NoticeRoutesDisagree, st.name(m.Name) + ", " + pair + ", guardrail: " + routesDisagree, m.Name})
		}
	}
	return list
}

// testNotices lists the notes of one test, as the Markdown's tables number
// them: that its two routes disagree, if they do, then its warnings.
func testNotices(z *experiment.Test, warnings []experiment.Warning) []Notice {
	var list []Notice
	if z != nil && z.RejectByStatistic != z.RejectByPValue {
		list = append(list, Notice{Code: NoticeRoutesDisagree, Text: routesDisagree})
	}
	for _, w := range warnings {
		list = append(list, Notice{Code: warningCode(w.Code), Text: warningText(w)})
	}
	return list
}

// dedupeNotices drops notices whose text (on one line) is empty or came
// before, keeping the first.
func dedupeNotices(list []Notice) []Notice {
	seen := make(map[string]bool, len(list))
	out := list[:0:0]
	for _, n := range list {
		n.Text = oneLine(n.Text)
		if n.Text == "" || seen[n.Text] {
			continue
		}
		seen[n.Text] = true
		out = append(out, n)
	}
	return out
}

// noticeTexts returns the notices' texts.
func noticeTexts(list []Notice) []string {
	return convertAll(list, func(n Notice) string { return n.Text })
}
