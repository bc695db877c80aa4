// Guardrail metrics: the margin, the non-inferiority table, its warnings
// and its conclusions, and the wording of lower-is-better metrics.

package report

import (
	"fmt"
	"strconv"
	"strings"

	"github.com/armtally/armtally/experiment"
)

// direction is "lower is better" or "higher is better".
func direction(m experiment.MetricReadout) string {
	if m.LowerIsBetter {
		return "lower is better"
	}
	return "higher is better"
}

// metricTitle is the metric's heading: its name, and what kind of metric
// it is when that changes how to read it.
func metricTitle(m experiment.MetricReadout) string {
	t := "Metric " + code(m.Name)
	switch {
	case m.Guardrail != nil:
		t += " (guardrail, " + direction(m) + ")"
	case m.LowerIsBetter:
		t += " (lower is better)"
	}
	return t
}

// formatShareOf prints a relative margin as a short percentage: 0.03 is
// "3%", 0.025 is "2.5%".
func formatShareOf(m float64) string {
	return strconv.FormatFloat(round(m*100, 6), 'f', -1, 64) + "%"
}

// formatSize prints the size of a difference in percentage points,
// without sign or unit: 0.005 is "0.50".
func formatSize(d float64) string {
	return strings.TrimPrefix(formatPoints(d), "+")
}

// absoluteMargin is the metric's margin as a difference of rates: the
// first guardrail test's, or the margin itself when it is absolute.
func absoluteMargin(m experiment.MetricReadout) (float64, bool) {
	for _, c := range m.Comparisons {
		if c.NonInferiority != nil {
			return c.NonInferiority.AbsoluteMargin, true
		}
	}
	if m.Guardrail != nil && !m.Guardrail.Relative {
		return m.Guardrail.Margin, true
	}
	return 0, false
}

// marginText describes the margin: "0.50 pp", or for a relative one "3%
// of the `control` rate 40.00%, that is 1.20 pp".
func marginText(m experiment.MetricReadout, control string, abs float64, absKnown bool) string {
	g := m.Guardrail
	if !g.Relative {
		return formatSize(g.Margin) + " pp"
	}
	s := formatShareOf(g.Margin) + " of the " + code(control) + " rate"
	if a := rateOf(m, control); a != nil && a.Rate != nil {
		s += " " + formatPercent(*a.Rate)
	}
	if absKnown {
		s += ", that is " + formatSize(abs) + " pp"
	} else {
		s += " (not known: the control has no units)"
	}
	return s
}

// worseWord is what "worse" means for the metric's direction.
func worseWord(m experiment.MetricReadout) (change, rate string) {
	if m.LowerIsBetter {
		return "rise", "a higher rate"
	}
	return "drop", "a lower rate"
}

// guardrailDefinition is the sentence under the metric definition that
// states the margin, the direction, the test and its interval level.
func guardrailDefinition(r experiment.Readout, m experiment.MetricReadout) string {
	abs, known := absoluteMargin(m)
	change, rate := worseWord(m)
	var b strings.Builder
	size := "the margin"
	if known {
		size = formatSize(abs) + " pp"
	}
	fmt.Fprintf(&b, "Guardrail: a treatment passes when the data rule out a %s of %s or more against %s (margin %s; %s, so worse means %s).",
		change, size, code(r.Control), marginText(m, r.Control, abs, known), direction(m), rate)
	alpha := r.Settings.Alpha
	method := r.Settings.NonInferiorityMethod
	if method == "" {
		method = "method not given"
	}
	bound := "lower"
	if m.LowerIsBetter {
		bound = "upper"
	}
	fmt.Fprintf(&b, " One-sided non-inferiority z test (%s) at alpha %s; the %s bound of its %s interval (1 - 2 × alpha) is the one-sided %s bound read against the margin. Outside the multiple-comparison family.",
		method, formatAlpha(alpha), bound, formatLevel(1-2*alpha), formatLevel(1-alpha))
	return b.String()
}

// niCheck is the interval of a guardrail test read against the margin.
type niCheck struct {
	bound    float64 // the interval's bound on the harmful side
	boundary float64 // the margin on the harmful side: -margin or +margin
	within   bool    // the bound is on the safe side of the boundary
	text     string  // "lower bound -0.94 > -1.20"
}

func checkInterval(m experiment.MetricReadout, ni *experiment.NonInferiorityTest) (niCheck, bool) {
	iv := ni.Interval
	if iv == nil {
		return niCheck{}, false
	}
	if m.LowerIsBetter {
		c := niCheck{bound: iv.Upper, boundary: ni.AbsoluteMargin}
		c.within = c.bound < c.boundary
		c.text = "upper bound " + pointsAgainst(c.bound, c.boundary, "<", "≥")
		return c, true
	}
	c := niCheck{bound: iv.Lower, boundary: -ni.AbsoluteMargin}
	c.within = c.bound > c.boundary
	c.text = "lower bound " + pointsAgainst(c.bound, c.boundary, "≤", ">")
	return c, true
}

// pointsAgainst writes two differences in percentage points with their
// relation, "-0.94 > -1.20", with more decimals when two would blur it.
func pointsAgainst(x, bound float64, below, above string) string {
	rel := relation(x, bound, below, above)
	for d := numberDecimals; d <= 17; d++ {
		sx, sb := signed(x*100, d), signed(bound*100, d)
		if sameRelation(parse(sx), parse(sb), x, bound) {
			return sx + " " + rel + " " + sb
		}
	}
	return strconv.FormatFloat(x*100, 'g', -1, 64) + " " + rel + " " + strconv.FormatFloat(bound*100, 'g', -1, 64)
}

// guardrailVerdict is the plain verdict of one guardrail test.
func guardrailVerdict(ni *experiment.NonInferiorityTest) string {
	switch {
	case ni == nil || ni.Z == nil:
		return "not tested"
	case ni.NonInferior:
		return "not worse than the margin"
	}
	return "not shown to be within the margin"
}

func (md *markdown) guardrails(r experiment.Readout, m experiment.MetricReadout, n *notes) {
	rows := []detailRow{
		{label: "Difference"},
		{label: "Margin", fold: func(c string) string { return "Margin: " + c + "." }},
		{label: "Hypotheses", fold: func(c string) string { return c + "." }},
		{label: "Test", fold: func(c string) string { return "Test: the " + c + "." }},
		{label: "Non-inferiority test, both routes"},
		{label: "Interval against the margin"},
		{label: "Verdict"},
		{label: "Notes", usual: "none", fold: sentence("No notes.")},
	}
	var header []string
	for _, c := range m.Comparisons {
		header = append(header, pairName(c))
		cells := guardrailCells(r, m, c, n)
		for i := range rows {
			rows[i].cells = append(rows[i].cells, cells[i])
		}
	}
	md.detailTable(header, rows)
	n.flush(md)
}

// guardrailConclusion is the plain-language line of one guardrail test.
func guardrailConclusion(m experiment.MetricReadout, c experiment.Comparison) string {
	ni := c.NonInferiority
	change, _ := worseWord(m)
	if ni == nil || ni.Z == nil {
		t, ctl := rateOf(m, c.Treatment), rateOf(m, c.Control)
		return fmt.Sprintf("Guardrail: %s could not be tested against %s (%s), so it has not passed.", code(c.Treatment), code(c.Control), noUnits(t, ctl, c))
	}
	var b strings.Builder
	fmt.Fprintf(&b, "Guardrail: %s is %s", code(c.Treatment), guardrailVerdict(ni))
	if c.Difference != nil {
		fmt.Fprintf(&b, ": %s", formatPP(*c.Difference))
		if iv := ni.Interval; iv != nil {
			fmt.Fprintf(&b, " (%s CI %s)", formatLevel(iv.Level), formatPPRange(iv.Lower, iv.Upper))
		}
	}
	rules := "rules out"
	if !ni.NonInferior {
		rules = "does not rule out"
	}
	fmt.Fprintf(&b, ", which %s a %s of %s pp or more against %s (non-inferiority %s).",
		rules, change, formatSize(ni.AbsoluteMargin), code(c.Control), pAgainst(ni.Z.PValue, ni.Z.Alpha))
	return b.String()
}

// directionNote is what a significant difference means for the metric:
// "" for a rise in a higher-is-better metric, the plain reading.
func directionNote(m experiment.MetricReadout, c experiment.Comparison) string {
	if !c.Significant || c.Difference == nil || *c.Difference == 0 {
		return ""
	}
	up := *c.Difference > 0
	switch {
	case m.LowerIsBetter && up:
		return "an increase, which is bad news for this metric (lower is better)"
	case m.LowerIsBetter:
		return "a decrease, which is good news for this metric (lower is better)"
	case !up:
		return "a decrease, which is bad news for this metric (higher is better)"
	}
	return ""
}

// guardrailCells returns one comparison's column of the guardrail table.
func guardrailCells(r experiment.Readout, m experiment.MetricReadout, c experiment.Comparison, n *notes) []string {
	t, ctl, diff := pairRates(m, c)
	ni := c.NonInferiority
	if ni == nil {
		return []string{diff, "n/a", "n/a", "not computed", "n/a", "n/a", "not tested", n.add()}
	}
	margin := formatSize(ni.AbsoluteMargin) + " pp"
	if m.Guardrail != nil && m.Guardrail.Relative {
		margin += " (" + formatShareOf(m.Guardrail.Margin) + " of the " + code(c.Control) + " rate)"
	}
	var hyp string
	if m.LowerIsBetter {
		b := formatPP(ni.AbsoluteMargin)
		hyp = "H0: difference ≥ " + b + " (worse by the margin or more); H1: difference < " + b
	} else {
		b := formatPP(-ni.AbsoluteMargin)
		hyp = "H0: difference ≤ " + b + " (worse by the margin or more); H1: difference > " + b
	}
	method, routes := zCells(ni.Z)
	against := "n/a (no interval)"
	if chk, ok := checkInterval(m, ni); ok {
		iv := ni.Interval
		against = fmt.Sprintf("%s CI %s: %s, ", formatLevel(iv.Level), formatPPRange(iv.Lower, iv.Upper), chk.text)
		if iv.Method != r.Settings.DifferenceIntervalMethod {
			against = fmt.Sprintf("%s CI %s (%s): %s, ", formatLevel(iv.Level), formatPPRange(iv.Lower, iv.Upper), iv.Method, chk.text)
		}
		if chk.within {
			against += "inside the margin"
		} else {
			against += "at or past the margin"
		}
		if ni.Z != nil && chk.within != ni.NonInferior {
			against += "; disagrees with the test, a borderline result"
		}
	}
	verdict := "**" + guardrailVerdict(ni) + "**"
	switch {
	case ni.Z == nil:
		verdict = "not tested (" + noUnits(t, ctl, c) + ")"
	case checkFailed(readoutVerdict(r), m.Name, c.Treatment):
		verdict = "**not readable**: a check failed (sample ratio), so no verdict is drawn from this test"
	}
	return []string{diff, margin, hyp, method, routes, against, verdict, n.addTest(ni.Z, ni.Warnings)}
}
