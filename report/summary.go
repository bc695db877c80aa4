// The summary at the top of each readout: the overall decision in one
// line, one row per treatment and metric, and the top cautions. The
// decision and the outcomes are the analysis's (experiment.Verdict); this
// file only words them.

package report

import (
	"fmt"
	"slices"
	"strings"

	"github.com/armtally/armtally/experiment"
)

// outcomeText is the summary's fixed vocabulary of outcomes.
var outcomeText = map[experiment.Outcome]string{
	experiment.OutcomeBetter:                 "better",
	experiment.OutcomeWorse:                  "worse",
	experiment.OutcomeNoDetectableDifference: "no detectable difference",
	experiment.OutcomeGuardrailHeld:          "guardrail held",
	experiment.OutcomeGuardrailNotShown:      "guardrail not shown",
	experiment.OutcomeCheckFailed:            "not readable: a check failed",
	experiment.OutcomeNotEnoughData:          "not enough data",
}

// outcomeWords words an outcome in the summary's fixed vocabulary.
func outcomeWords(o experiment.Outcome) string {
	if t, ok := outcomeText[o]; ok {
		return t
	}
	return o.String()
}

// decisionWord is a decision as the summary says it: its code, with
// fix_data in words.
func decisionWord(d experiment.Decision) string {
	if d == experiment.DecisionFixData {
		return "fix the data"
	}
	return d.String()
}

// rowOutcome returns the verdict's outcome of treatment on metric, and
// false when the verdict has no such row.
func rowOutcome(v experiment.Verdict, metric, treatment string) (experiment.Outcome, bool) {
	for _, row := range v.Rows {
		if row.Metric == metric && row.Treatment == treatment {
			return row.Outcome, true
		}
	}
	return 0, false
}

// checkFailed reports whether the verdict makes the comparison of
// treatment on metric unreadable.
func checkFailed(v experiment.Verdict, metric, treatment string) bool {
	o, ok := rowOutcome(v, metric, treatment)
	return ok && o == experiment.OutcomeCheckFailed
}

// summary writes the readout's summary: the overall line, the table of
// outcomes and the line of top cautions.
func (md *markdown) summary(r experiment.Readout) {
	v := readoutVerdict(r)
	md.paraLine(overallLine(r, v))
	if len(v.Rows) > 0 {
		rows := make([][]string, 0, len(v.Rows))
		for _, row := range v.Rows {
			rows = append(rows, summaryRow(r, row))
		}
		md.table([]string{"Metric", "Role", "Treatment", "Difference (CI)", "Lift", "p (adjusted)", "Outcome"}, "lllrrrl", rows)
	}
	md.paraLine(topCautions(r, v))
}

// overallLine answers "ship, stop or wait, and why" in one line: the
// decision and the treatments it names, each treatment's reasons with the
// metrics behind them, and the checks.
func overallLine(r experiment.Readout, v experiment.Verdict) string {
	var b strings.Builder
	names := codes(v.Treatments)
	switch v.Decision {
	case experiment.DecisionFixData:
		sr := r.SampleRatio
		fmt.Fprintf(&b, "**Fix the data first: no comparison is readable.** The sample ratio check failed (%s): units per arm are off the planned split, so assignment or logging may be broken; find the cause before reading any result.",
			pAgainstStrict(sr.PValue, sr.Threshold))
		return b.String()
	case experiment.DecisionShip:
		fmt.Fprintf(&b, "**Ship %s.**", joinWith(names, "or"))
	case experiment.DecisionStop:
		fmt.Fprintf(&b, "**Stop %s.**", joinAnd(names))
	default:
		b.WriteString("**Wait: nothing to ship or stop yet.**")
	}
	// The treatments the decision names first, then the others, each in
	// arm order.
	var clauses []string
	per := slices.Clone(v.PerTreatment)
	slices.SortStableFunc(per, func(a, b experiment.TreatmentVerdict) int {
		return cmpBool(a.Decision != v.Decision, b.Decision != v.Decision)
	})
	for _, tv := range per {
		c := code(tv.Treatment)
		if tv.Decision != v.Decision {
			c += " (" + decisionWord(tv.Decision) + ")"
		}
		reasons := treatmentReasons(v, tv)
		if better := metricsOf(v, tv.Treatment, false, experiment.OutcomeBetter); better != "" && tv.Decision != experiment.DecisionShip {
			reasons = "is better on " + better + ", but " + reasons
		}
		clauses = append(clauses, c+" "+reasons)
	}
	if len(clauses) == 0 {
		b.WriteString(" There is no treatment to compare with the control.")
	} else {
		b.WriteString(" " + capitalize(strings.Join(clauses, "; ")) + ".")
	}
	b.WriteString(" " + checksSentence(r))
	if v.Decision == experiment.DecisionWait {
		b.WriteString(waitProgress(r.Monitoring))
	}
	if v.Decision == experiment.DecisionShip || v.Decision == experiment.DecisionStop {
		b.WriteString(sequentialCaution(r.Monitoring))
	}
	return b.String()
}

// reasonWords words each reason of a treatment: the phrase, and the rows
// whose metrics it names (guardrails or primary metrics, with outcome).
var reasonWords = map[experiment.Reason]struct {
	phrase    string
	guardrail bool
	outcome   experiment.Outcome
}{
	experiment.ReasonPrimaryBetter:       {"is better on", false, experiment.OutcomeBetter},
	experiment.ReasonGuardrailsHeld:      {"held", true, experiment.OutcomeGuardrailHeld},
	experiment.ReasonPrimaryWorse:        {"is worse on", false, experiment.OutcomeWorse},
	experiment.ReasonGuardrailWorse:      {"is worse on", true, experiment.OutcomeWorse},
	experiment.ReasonNoPrimaryDifference: {"shows no detectable difference on", false, experiment.OutcomeNoDetectableDifference},
	experiment.ReasonGuardrailNotShown:   {"is not shown to hold", true, experiment.OutcomeGuardrailNotShown},
}

// treatmentReasons words one treatment's reasons, each with the metrics
// of its rows that carry it: "is better on the primary metric `purchase`".
func treatmentReasons(v experiment.Verdict, tv experiment.TreatmentVerdict) string {
	var parts []string
	for _, reason := range tv.Reasons {
		if w, ok := reasonWords[reason]; ok {
			parts = append(parts, w.phrase+" "+metricsOf(v, tv.Treatment, w.guardrail, w.outcome))
			continue
		}
		switch reason {
		case experiment.ReasonNotEnoughData:
			m := metricsOf(v, tv.Treatment, false, experiment.OutcomeNotEnoughData)
			if m == "" {
				m = metricsOf(v, tv.Treatment, true, experiment.OutcomeNotEnoughData)
			}
			if m != "" {
				m = " on " + m
			}
			parts = append(parts, "has not enough data"+m)
		case experiment.ReasonSampleRatioMismatch:
			parts = append(parts, "is not readable (the sample ratio check failed)")
		}
	}
	if len(parts) == 0 {
		return "has no reason given"
	}
	return joinAnd(parts)
}

// metricsOf names the metrics on which treatment has outcome: the
// primary metrics, or the guardrails when guardrail is set ("the primary
// metric `purchase`", "the guardrails `cart` and `refund`"); "" when
// there are none.
func metricsOf(v experiment.Verdict, treatment string, guardrail bool, outcome experiment.Outcome) string {
	var names []string
	for _, row := range v.Rows {
		if row.Treatment != treatment || row.Outcome != outcome || row.Guardrail != guardrail {
			continue
		}
		if !guardrail && row.Role != experiment.Primary {
			continue
		}
		names = append(names, code(row.Metric))
	}
	if len(names) == 0 {
		return ""
	}
	what := PluralWord(int64(len(names)), "the primary metric", "the primary metrics")
	if guardrail {
		what = PluralWord(int64(len(names)), "the guardrail", "the guardrails")
	}
	return what + " " + joinAnd(names)
}

// checksSentence says how the data checks came out.
func checksSentence(r experiment.Readout) string {
	sr := r.SampleRatio
	switch {
	case !sr.Checked:
		return "Sample ratio not checked (fewer than two arms have units)."
	case sr.Mismatch:
		return "The sample ratio check failed (" + pAgainstStrict(sr.PValue, sr.Threshold) + ")."
	}
	return "The sample ratio check passed (" + pAgainstStrict(sr.PValue, sr.Threshold) + ")."
}

// summaryRow is one row of the summary table: the metric, its role, the
// treatment, the difference with its interval, the lift, the p-value
// that decides (adjusted when the comparison is in a family, the
// non-inferiority test's for a guardrail) and the outcome.
func summaryRow(r experiment.Readout, row experiment.VerdictRow) []string {
	role := row.RoleName()
	out := []string{code(row.Metric), role, code(row.Treatment), "n/a", "n/a", "n/a", outcomeWords(row.Outcome)}
	if row.MetricIndex < 0 || row.MetricIndex >= len(r.Metrics) {
		return out
	}
	m := r.Metrics[row.MetricIndex]
	if row.ComparisonIndex < 0 || row.ComparisonIndex >= len(m.Comparisons) {
		return out
	}
	c := m.Comparisons[row.ComparisonIndex]
	iv := c.DifferenceInterval
	if ni := c.NonInferiority; row.Guardrail && ni != nil {
		iv = ni.Interval
		out[1] = role + ", margin " + formatSize(ni.AbsoluteMargin) + " pp"
	}
	if c.Difference != nil {
		out[3] = formatPP(*c.Difference)
		if iv != nil {
			out[3] += " (" + formatLevel(iv.Level) + " CI " + formatPoints(iv.Lower) + " to " + formatPoints(iv.Upper) + ")"
		}
	}
	if c.RelativeLift != nil {
		out[4] = formatSignedPercent(*c.RelativeLift)
	}
	out[5] = summaryP(row, c)
	return out
}

// summaryP is the summary's p-value cell.
func summaryP(row experiment.VerdictRow, c experiment.Comparison) string {
	if row.Guardrail {
		if ni := c.NonInferiority; ni != nil && ni.Z != nil {
			return formatPValue(ni.Z.PValue) + " (non-inferiority)"
		}
		return "n/a"
	}
	if decider(c.DecidedBy, c.Z, c.Exact) == "" {
		return "n/a"
	}
	if adj := c.Adjusted; adj != nil && adjusts(adj.Method) {
		return formatPValue(adj.PValue)
	}
	return formatPValue(decisionP(c.DecidedBy, c.Z, c.Exact)) + " (not adjusted)"
}

// topCautions is the line under the summary: the warnings to read, and
// the cautions that matter most where the reader decides.
func topCautions(r experiment.Readout, v experiment.Verdict) string {
	var parts []string
	if n := len(readoutNotices(r, markdownNotices)); n > 0 {
		parts = append(parts, "read the "+Plural(int64(n), "warning", "warnings")+" below first")
	}
	if v.Decision == experiment.DecisionFixData {
		parts = append(parts, "no result is readable until the cause of the sample ratio mismatch is found")
	}
	parts = append(parts,
		"a significant difference is not necessarily one large enough to matter: judge each interval against the smallest effect worth acting on",
		"read the result at the sample size or date fixed in advance, not at the first look that seems significant")
	if hasRole(v, experiment.Secondary) {
		parts = append(parts, "secondary metrics inform but do not decide")
	}
	if len(r.Segmentation.Dimensions) > 0 {
		parts = append(parts, "segment results are leads, not findings")
	}
	return "**Cautions:** " + strings.Join(parts, "; ") + "."
}

// hasRole reports whether a row of v that is not a guardrail has role.
func hasRole(v experiment.Verdict, role experiment.Role) bool {
	for _, row := range v.Rows {
		if !row.Guardrail && row.Role == role {
			return true
		}
	}
	return false
}

// codes writes names as code spans.
func codes(names []string) []string {
	out := make([]string, len(names))
	for i, n := range names {
		out[i] = code(n)
	}
	return out
}

// joinWith joins "a", "a or b", "a, b or c" with word before the last.
func joinWith(list []string, word string) string {
	if len(list) < 2 {
		return strings.Join(list, "")
	}
	return strings.Join(list[:len(list)-1], ", ") + " " + word + " " + list[len(list)-1]
}

// cmpBool orders false before true.
func cmpBool(a, b bool) int {
	switch {
	case a == b:
		return 0
	case !a:
		return -1
	}
	return 1
}
