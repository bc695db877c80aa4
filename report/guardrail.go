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
	fmt.Fprintf(&b, "Guardrail: each treatment must be shown not worse than %s by more than %s; %s, so worse means %s, and a treatment passes when the data rule out a %s of %s or more.",
		code(r.Control), marginText(m, r.Control, abs, known), direction(m), rate, change, size)
	alpha := r.Settings.Alpha
	method := r.Settings.NonInferiorityMethod
	if method == "" {
		method = "method not given"
	}
	bound := "lower"
	if m.LowerIsBetter {
		bound = "upper"
	}
	fmt.Fprintf(&b, " It is decided by the one-sided non-inferiority z test (%s) at alpha %s; its interval is two-sided at %s (1 - 2 × alpha), so that its %s bound is the one-sided %s bound compared with the margin.",
		method, formatAlpha(alpha), formatLevel(1-2*alpha), bound, formatLevel(1-alpha))
	b.WriteString(" Guardrail comparisons are outside the multiple-comparison family.")
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
	for d := max(decimalsFor(x*100), decimalsFor(bound*100)); d <= 17; d++ {
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
	header := []string{""}
	labels := []string{"Rates", "Difference", "Margin", "Hypotheses", "Non-inferiority z test", "Statistic route", "p-value route", "Interval against the margin", "Verdict", "Notes"}
	var cols [][]string
	for _, c := range m.Comparisons {
		header = append(header, pairName(c))
		t, ctl, diff := pairRates(m, c)
		ni := c.NonInferiority
		if ni == nil {
			cols = append(cols, []string{rateText(t) + " vs " + rateText(ctl), diff, "n/a", "n/a", "not computed", "n/a", "n/a", "n/a", "not tested", n.add()})
			continue
		}
		margin := formatSize(ni.AbsoluteMargin) + " pp"
		if m.Guardrail != nil && m.Guardrail.Relative {
			margin += " (" + formatShareOf(m.Guardrail.Margin) + " of the " + code(c.Control) + " rate)"
		}
		var hyp string
		if m.LowerIsBetter {
			b := formatPoints(ni.AbsoluteMargin)
			hyp = "H0: difference ≥ " + b + " pp (worse by the margin or more); H1: difference < " + b + " pp"
		} else {
			b := formatPoints(-ni.AbsoluteMargin)
			hyp = "H0: difference ≤ " + b + " pp (worse by the margin or more); H1: difference > " + b + " pp"
		}
		zt, statRoute, pRoute := zRows(ni.Z)
		against := "n/a (no interval)"
		if chk, ok := checkInterval(m, ni); ok {
			iv := ni.Interval
			against = fmt.Sprintf("%s CI %s to %s pp (%s): %s, ", formatLevel(iv.Level), formatPoints(iv.Lower), formatPoints(iv.Upper), iv.Method, chk.text)
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
		if ni.Z == nil {
			verdict = "not tested (" + noUnits(t, ctl, c) + ")"
		}
		cols = append(cols, []string{
			rateText(t) + " vs " + rateText(ctl),
			diff,
			margin,
			hyp,
			zt, statRoute, pRoute,
			against,
			verdict,
			n.addTest(ni.Z, ni.Warnings),
		})
	}
	md.table(header, "", transpose(labels, cols))
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
		fmt.Fprintf(&b, ": %s points", formatPoints(*c.Difference))
		if iv := ni.Interval; iv != nil {
			fmt.Fprintf(&b, " (%s CI %s to %s)", formatLevel(iv.Level), formatPoints(iv.Lower), formatPoints(iv.Upper))
		}
	}
	rules := "rules out"
	if !ni.NonInferior {
		rules = "does not rule out"
	}
	fmt.Fprintf(&b, ", which %s a %s of %s points or more against %s (non-inferiority %s).",
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
