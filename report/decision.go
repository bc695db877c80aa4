// The decision rows of the comparison and target tables, and the
// plain-language conclusions drawn from them.

package report

import (
	"fmt"
	"math"
	"strings"

	"github.com/armtally/armtally/experiment"
)

// zCells returns a z test's method and sidedness ("pooled two-proportion
// z test, two-sided") and its decision by both routes in one cell:
// "|z| = 2.80 ≥ 1.96 and p = 0.0052 ≤ 0.05: reject H0", each route with
// its own decision when they disagree.
func zCells(z *experiment.Test) (method, routes string) {
	if z == nil {
		return "not computed", "not computed"
	}
	method = z.Method + ", " + alternativeShort(z.Alternative)
	st := statAgainst(z.Statistic, z.CriticalValue, z.Alternative)
	pr := pAgainst(z.PValue, z.Alpha)
	if z.RejectByStatistic == z.RejectByPValue {
		return method, st + " and " + pr + ": " + rejectText(z.RejectByPValue)
	}
	return method, st + ": " + rejectText(z.RejectByStatistic) + "; " + pr + ": " + rejectText(z.RejectByPValue)
}

func alternativeShort(a string) string {
	switch a {
	case "greater", "less":
		return "one-sided (" + a + ")"
	}
	return "two-sided"
}

func rejectText(reject bool) string {
	if reject {
		return "reject H0"
	}
	return "do not reject H0"
}

func conditionText(met bool, where string, z *experiment.Test, exact *experiment.ExactTest) string {
	if !testRun(z, exact) {
		return "n/a (no test was run)"
	}
	if met {
		return "justified (enough conversions and non-conversions " + where + ")"
	}
	return "not justified; " + exactFallback(exact)
}

func exactText(e *experiment.ExactTest, conditionMet bool) string {
	if e == nil {
		if conditionMet {
			return "not needed"
		}
		return "not run"
	}
	return fmt.Sprintf("%s, %s: %s: %s", e.Method, alternativeShort(e.Alternative), pAgainst(e.PValue, e.Alpha), rejectText(e.Reject))
}

// notReadable is the Decision cell of a test that a failed check makes
// unreadable.
const notReadable = "**not readable**: a check failed (sample ratio), so no decision is drawn from this test"

// decisionCell is the Decision cell of a comparison: the verdict's
// outcome (for a metric that is not a guardrail), the reported decision
// (at the alpha of the routes above it), after which adjustment, and the
// one before adjustment when it differs.
// A comparison that a failed check makes unreadable says so instead,
// whatever its test says.
func decisionCell(v experiment.Verdict, m experiment.MetricReadout, c experiment.Comparison) string {
	by := decider(c.DecidedBy, c.Z, c.Exact)
	if by == "" {
		return "no decision (no test could be run)"
	}
	if checkFailed(v, m.Name, c.Treatment) {
		return notReadable
	}
	s := "not significant"
	if c.Significant {
		s = "significant"
	}
	if o, ok := rowOutcome(v, m.Name, c.Treatment); ok && m.Guardrail == nil {
		s = "**" + outcomeWords(o) + "**: " + s
	}
	adj := c.Adjusted
	switch {
	case adj == nil && m.Guardrail != nil:
		s += " (guardrail metric, outside the family)"
	case adj == nil:
		s += " (outside the family)"
	case !adjusts(adj.Method):
		s += " (no adjustment)"
	default:
		s += " after " + adjustmentName(adj.Method) + " adjustment"
		if adj.Family == experiment.Secondary {
			s += " in the secondary family"
		}
		switch {
		case c.Significant == c.SignificantUnadjusted:
			s += ", as before it"
		case c.SignificantUnadjusted:
			s += "; significant before it"
		default:
			s += "; not significant before it"
		}
	}
	if c.DecidedBy == experiment.DecidedByExact && c.Exact != nil {
		s += "; by " + by
	}
	return s
}

// decisionText states the decision and which test made it.
func decisionText(significant bool, decidedBy string, z *experiment.Test, e *experiment.ExactTest) string {
	by := decider(decidedBy, z, e)
	if by == "" {
		return "no decision (no test could be run)"
	}
	alpha := formatAlpha(decisionAlpha(decidedBy, z, e))
	if significant {
		return "**significant** at alpha " + alpha + ", by " + by
	}
	return "not significant at alpha " + alpha + ", by " + by
}

// decisionAlpha is the alpha of the test that decided: the exact test's
// when it decided, the z test's otherwise.
func decisionAlpha(decidedBy string, z *experiment.Test, e *experiment.ExactTest) float64 {
	switch {
	case decidedBy == "exact_test" && e != nil:
		return e.Alpha
	case z != nil:
		return z.Alpha
	case e != nil:
		return e.Alpha
	}
	return 0
}

// decider names the test behind a decision.
func decider(decidedBy string, z *experiment.Test, e *experiment.ExactTest) string {
	switch decidedBy {
	case "":
		return ""
	case "z_test":
		if z != nil {
			return theMethod(z.Method)
		}
		return "the z test"
	case "exact_test":
		if e != nil {
			return theMethod(e.Method)
		}
		return "the exact test"
	}
	return formatReason(decidedBy)
}

func (md *markdown) conclusion(r experiment.Readout, m experiment.MetricReadout) {
	var lines []string
	if m.Guardrail != nil {
		for _, c := range m.Comparisons {
			lines = append(lines, guardrailConclusion(m, c))
		}
	}
	for _, c := range m.Comparisons {
		lines = append(lines, comparisonConclusion(m, c))
	}
	for i := range m.Arms {
		if m.Arms[i].TargetTest != nil {
			lines = append(lines, targetConclusion(&m.Arms[i]))
		}
	}
	if len(lines) == 0 {
		md.para("**Conclusion:** no treatment to compare with the control and no target rate, so nothing was tested.")
		return
	}
	intro := "**Conclusion:**"
	if readoutVerdict(r).Decision == experiment.DecisionFixData {
		intro += " not readable: the sample ratio check failed, so no decision is drawn from these numbers, which may be biased whatever they say. As computed:"
	}
	md.para(intro)
	for _, l := range lines {
		md.line("- " + l)
	}
	md.line("")
}

func comparisonConclusion(m experiment.MetricReadout, c experiment.Comparison) string {
	t, ctl := rateOf(m, c.Treatment), rateOf(m, c.Control)
	if c.Difference == nil || t == nil || ctl == nil || t.Rate == nil || ctl.Rate == nil {
		return fmt.Sprintf("%s cannot be compared with %s: %s.", code(c.Treatment), code(c.Control), noUnits(t, ctl, c))
	}
	var b strings.Builder
	fmt.Fprintf(&b, "%s vs %s: %s", code(c.Treatment), code(c.Control), formatPP(*c.Difference))
	if iv := c.DifferenceInterval; iv != nil {
		fmt.Fprintf(&b, " (%s CI %s", formatLevel(iv.Level), formatPPRange(iv.Lower, iv.Upper))
		if c.Adjusted != nil && c.Adjusted.DifferenceInterval != nil {
			sim := c.Adjusted.DifferenceInterval
			fmt.Fprintf(&b, "; %s simultaneous CI %s", formatLevel(sim.Level), formatPPRange(sim.Lower, sim.Upper))
		}
		b.WriteString(")")
	}
	if c.RelativeLift != nil {
		fmt.Fprintf(&b, ", lift %s", formatSignedPercent(*c.RelativeLift))
	} else {
		b.WriteString(", lift undefined (" + liftUndefined(ctl, c) + ")")
	}
	b.WriteString("; ")
	b.WriteString(comparisonVerdict(c, "the data do not separate it from "+code(c.Control)))
	if d := directionNote(m, c); d != "" {
		b.WriteString(": " + d)
	}
	if !c.IntervalAgrees {
		b.WriteString("; the interval and the test disagree, so treat it as borderline")
	}
	b.WriteString(".")
	return b.String()
}

func targetConclusion(a *experiment.ArmRate) string {
	tt := a.TargetTest
	if a.Rate == nil {
		return fmt.Sprintf("%s has no units to test against the target %s.", code(a.Arm), formatPercent(tt.Target))
	}
	side := "above"
	switch {
	case *a.Rate < tt.Target:
		side = "below"
	case *a.Rate == tt.Target:
		side = "exactly at"
	}
	return fmt.Sprintf("%s converted at %s, %s the target %s; %s.", code(a.Arm), formatPercent(*a.Rate), side, formatPercent(tt.Target),
		verdict(tt.Significant, tt.DecidedBy, tt.Z, tt.Exact, "the data do not separate it from the target"))
}

// comparisonVerdict is verdict for a comparison with the control: the
// final decision, said after which adjustment, and the unadjusted one when
// it differs.
func comparisonVerdict(c experiment.Comparison, otherwise string) string {
	adj := c.Adjusted
	if adj == nil || !adjusts(adj.Method) || decider(c.DecidedBy, c.Z, c.Exact) == "" {
		return verdict(c.Significant, c.DecidedBy, c.Z, c.Exact, otherwise)
	}
	alpha := formatAlpha(decisionAlpha(c.DecidedBy, c.Z, c.Exact))
	after := adjustmentName(adj.Method) + " adjustment over " + Plural(int64(adj.FamilySize), "comparison", "comparisons")
	var s, first string
	switch {
	case c.Significant && c.SignificantUnadjusted:
		s = "significant at alpha " + alpha + " after " + after
	case !c.Significant && !c.SignificantUnadjusted:
		s = "not significant at alpha " + alpha + ", before or after " + after
	case !c.Significant:
		s = "significant at alpha " + alpha + " before adjustment but not after " + after
		first = "adjusted " + pAgainst(adj.PValue, decisionAlpha(c.DecidedBy, c.Z, c.Exact))
		otherwise += " once the other comparisons of the family are counted"
	default:
		s = "significant at alpha " + alpha + " after " + after + ", though not before"
	}
	return s + qualifiers(c.DecidedBy, c.Z, c.Exact, c.Significant, otherwise, first)
}

// verdict is the plain-language decision: "significant at alpha 0.05" with
// the sidedness when one-sided and the exact test when it decided.
func verdict(significant bool, decidedBy string, z *experiment.Test, e *experiment.ExactTest, otherwise string) string {
	if decider(decidedBy, z, e) == "" {
		return "no test could be run"
	}
	s := "not significant at alpha " + formatAlpha(decisionAlpha(decidedBy, z, e))
	if significant {
		s = "significant at alpha " + formatAlpha(decisionAlpha(decidedBy, z, e))
	}
	return s + qualifiers(decidedBy, z, e, significant, otherwise, "")
}

// qualifiers ends a verdict: first (when not ""), the sidedness when
// one-sided and the exact test when it decided, in one parenthesis, then
// what a result that is not significant means.
func qualifiers(decidedBy string, z *experiment.Test, e *experiment.ExactTest, significant bool, otherwise, first string) string {
	alt := ""
	switch {
	case decidedBy == "exact_test" && e != nil:
		alt = e.Alternative
	case z != nil:
		alt = z.Alternative
	case e != nil:
		alt = e.Alternative
	}
	s := ""
	var qual []string
	if first != "" {
		qual = append(qual, first)
	}
	if alt == "greater" || alt == "less" {
		qual = append(qual, "one-sided, "+alt)
	}
	if decidedBy == "exact_test" && e != nil {
		qual = append(qual, "by "+theMethod(e.Method))
	}
	if len(qual) > 0 {
		s += " (" + strings.Join(qual, ", ") + ")"
	}
	if !significant {
		s += ": " + otherwise
	}
	return s
}

// levelRule says how a simultaneous level follows from alpha and the
// family size m: "1 - 0.05 / 4" for a two-sided test, "1 - 2 × 0.05 / 4"
// for a one-sided one (whose intervals are two-sided at 1 - 2 × alpha),
// whichever the level matches; the level as a number when neither does.
func levelRule(level, alpha float64, m int) string {
	if m < 1 {
		return formatLevel(level)
	}
	two := 1 - alpha/float64(m)
	one := 1 - 2*alpha/float64(m)
	switch {
	case math.Abs(level-two) < 1e-9:
		return fmt.Sprintf("1 - %s / %d", formatAlpha(alpha), m)
	case math.Abs(level-one) < 1e-9:
		return fmt.Sprintf("1 - 2 × %s / %d", formatAlpha(alpha), m)
	}
	return formatLevel(level)
}
