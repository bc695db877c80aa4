// The multiple-comparison family: its statement before the metrics, the
// adjusted rows of the comparison tables and the adjusted decisions.

package report

import (
	"fmt"
	"strings"

	"github.com/armtally/armtally/experiment"
)

// adjustmentName is the name of an adjustment as the readout prints it
// before "adjustment": "Holm", "Benjamini-Hochberg"; "no" for none.
func adjustmentName(method string) string {
	switch method {
	case "none", "":
		return "no"
	case "bonferroni":
		return "Bonferroni"
	case "holm":
		return "Holm"
	case "hochberg":
		return "Hochberg"
	case "bh":
		return "Benjamini-Hochberg"
	case "by":
		return "Benjamini-Yekutieli"
	}
	return method
}

// adjustmentLong adds how the method steps through the sorted p-values
// where that is part of its usual name.
func adjustmentLong(method string) string {
	switch method {
	case "holm":
		return "Holm adjustment (step-down)"
	case "hochberg":
		return "Hochberg adjustment (step-up)"
	}
	return adjustmentName(method) + " adjustment"
}

// adjusts reports whether method changes p-values at all.
func adjusts(method string) bool {
	return method != "none" && method != ""
}

// errorRateText names, with what it means, the error rate the family's
// method keeps at alpha.
func errorRateText(rate string) string {
	switch rate {
	case "family-wise error rate":
		return "the family-wise error rate (the chance of even one false positive among them)"
	case "false discovery rate":
		return "the false discovery rate (the expected share of false positives among the comparisons found significant)"
	}
	return "the " + rate
}

// joinAnd joins "a", "a and b", "a, b and c".
func joinAnd(list []string) string {
	switch len(list) {
	case 0:
		return ""
	case 1:
		return list[0]
	}
	return strings.Join(list[:len(list)-1], ", ") + " and " + list[len(list)-1]
}

// familyMembers lists, per metric in readout order, the treatments whose
// comparison with the control is in the family of role (Adjusted set
// with that family).
func familyMembers(r experiment.Readout, role experiment.Role) (metrics []string, treatments [][]string, control string) {
	control = r.Control
	for _, m := range r.Metrics {
		var ts []string
		for _, c := range m.Comparisons {
			if c.Adjusted != nil && c.Adjusted.Family == role {
				ts = append(ts, code(c.Treatment))
				control = c.Control
			}
		}
		if len(ts) > 0 {
			metrics = append(metrics, code(m.Name))
			treatments = append(treatments, ts)
		}
	}
	return metrics, treatments, control
}

// familyList names the comparisons of the family of role: "`a` and `b`
// against `control` on `m1` and `m2`" when every metric has the same
// treatments, else one clause per metric.
func familyList(r experiment.Readout, role experiment.Role) string {
	metrics, treatments, control := familyMembers(r, role)
	if len(metrics) == 0 {
		return ""
	}
	same := true
	for _, ts := range treatments[1:] {
		if strings.Join(ts, ",") != strings.Join(treatments[0], ",") {
			same = false
		}
	}
	if same {
		return joinAnd(treatments[0]) + " against " + code(control) + " on " + joinAnd(metrics)
	}
	clauses := make([]string, len(metrics))
	for i := range metrics {
		clauses[i] = joinAnd(treatments[i]) + " against " + code(control) + " on " + metrics[i]
	}
	return strings.Join(clauses, "; ")
}

// overFamily is "4 comparisons", or "2 comparisons (secondary family)"
// for a comparison adjusted in the secondary family.
func overFamily(adj *experiment.Adjusted) string {
	s := Plural(int64(adj.FamilySize), "comparison", "comparisons")
	if adj.Family == experiment.Secondary {
		s += " (secondary family)"
	}
	return s
}

// outside counts the tests decided outside the family: target-rate tests,
// guardrail non-inferiority tests, the difference tests of guardrail
// metrics, and any other comparison with a decision but no adjustment.
type outside struct {
	targets, guardrails, guardrailDiffs, others int
}

func (o outside) total() int { return o.targets + o.guardrails + o.guardrailDiffs + o.others }

// text lists the counts in words, "" when there are none.
func (o outside) text() string {
	var parts []string
	if o.targets > 0 {
		parts = append(parts, Plural(int64(o.targets), "target-rate test", "target-rate tests"))
	}
	if o.guardrails > 0 {
		parts = append(parts, Plural(int64(o.guardrails), "guardrail non-inferiority test", "guardrail non-inferiority tests"))
	}
	if o.guardrailDiffs > 0 {
		parts = append(parts, Plural(int64(o.guardrailDiffs), "difference test on a guardrail metric", "difference tests on guardrail metrics"))
	}
	if o.others > 0 {
		parts = append(parts, Plural(int64(o.others), "other comparison", "other comparisons"))
	}
	return joinAnd(parts)
}

func countOutside(r experiment.Readout) outside {
	var o outside
	for _, m := range r.Metrics {
		for _, c := range m.Comparisons {
			if ni := c.NonInferiority; ni != nil && ni.Z != nil {
				o.guardrails++
			}
			if c.Adjusted != nil || decider(c.DecidedBy, c.Z, c.Exact) == "" {
				continue
			}
			if m.Guardrail != nil {
				o.guardrailDiffs++
			} else {
				o.others++
			}
		}
		for _, a := range m.Arms {
			if tt := a.TargetTest; tt != nil && decider(tt.DecidedBy, tt.Z, tt.Exact) != "" {
				o.targets++
			}
		}
	}
	return o
}

// changedByAdjustment counts the comparisons of the family of role whose
// reported decision differs from the unadjusted one.
func changedByAdjustment(r experiment.Readout, role experiment.Role) int {
	k := 0
	for _, m := range r.Metrics {
		for _, c := range m.Comparisons {
			if c.Adjusted != nil && c.Adjusted.Family == role && c.Significant != c.SignificantUnadjusted {
				k++
			}
		}
	}
	return k
}

// multiplicity writes the statement of the multiple-comparison families:
// the confirmatory family of the primary metrics and, when the readout
// has secondary metrics, their family.
func (md *markdown) multiplicity(r experiment.Readout) {
	md.heading(1, "Multiple comparisons")
	families := r.Families()
	for i, mc := range families {
		var b strings.Builder
		if len(families) > 1 {
			if mc.Role == experiment.Secondary {
				b.WriteString("**Secondary family** (secondary metrics; they never change the decision): ")
			} else {
				b.WriteString("**Confirmatory family** (primary metrics; they decide): ")
			}
		}
		b.WriteString(familyStatement(r, mc))
		o := countOutside(r)
		var out []string
		if o.targets > 0 {
			out = append(out, "target-rate tests")
		}
		if o.guardrails > 0 || o.guardrailDiffs > 0 {
			out = append(out, "guardrail metrics (their non-inferiority tests and their difference tests)")
		}
		if i == len(families)-1 && len(out) > 0 && mc.Size > 0 {
			fmt.Fprintf(&b, " Outside the %s, each at alpha %s on its own: %s.",
				PluralWord(int64(len(families)), "family", "families"), formatAlpha(r.Settings.Alpha), joinAnd(out))
		}
		md.para(b.String())
	}
}

// familyStatement says how one family was adjusted and what it holds.
func familyStatement(r experiment.Readout, mc experiment.Multiplicity) string {
	alpha := r.Settings.Alpha
	var b strings.Builder
	list := familyList(r, mc.Role)
	switch {
	case mc.Size == 0 && !adjusts(mc.Method):
		b.WriteString("No adjustment for multiple comparisons, and no comparison with the control could be tested.")
	case mc.Size == 0:
		fmt.Fprintf(&b, "%s chosen, but no comparison with the control could be tested, so the family is empty.", capitalize(adjustmentLong(mc.Method)))
	case !adjusts(mc.Method):
		fmt.Fprintf(&b, "No adjustment for multiple comparisons: the %s with the control (%s) are each decided at alpha %s on its own, so the more of them, the likelier one is significant by chance.",
			Plural(int64(mc.Size), "comparison", "comparisons"), list, formatAlpha(alpha))
	default:
		fmt.Fprintf(&b, "%s over a family of %s, keeping %s at alpha %s. ", capitalize(adjustmentLong(mc.Method)), Plural(int64(mc.Size), "comparison", "comparisons"), errorRateText(mc.ErrorRate), formatAlpha(alpha))
		if mc.Family != "" {
			fmt.Fprintf(&b, "The family is %s: %s. ", strings.TrimSuffix(mc.Family, "."), list)
		} else {
			fmt.Fprintf(&b, "The family: %s. ", list)
		}
		if mc.Size == 1 {
			b.WriteString("With one comparison the adjusted p-value equals the unadjusted one. ")
		}
		b.WriteString("Each comparison's Decision row gives the adjusted decision, which is the final one, and says when the decision before adjustment differs.")
		if mc.Method == "bonferroni" {
			b.WriteString(bonferroniSentence(r, mc))
		}
	}
	return b.String()
}

// bonferroniSentence states the level of the simultaneous intervals of a
// Bonferroni family: the level the comparison tables print (1 - alpha/m,
// or 1 - 2 alpha/m for a one-sided alternative, whose intervals are at
// 1 - 2 alpha), and the level they hold at together.
func bonferroniSentence(r experiment.Readout, mc experiment.Multiplicity) string {
	level := 1 - (1-r.Settings.ConfidenceLevel)/float64(mc.Size)
	for _, m := range r.Metrics {
		for _, c := range m.Comparisons {
			if a := c.Adjusted; a != nil && a.Family == mc.Role && a.DifferenceInterval != nil {
				level = a.DifferenceInterval.Level
			}
		}
	}
	rule := fmt.Sprintf("1 - %s / %d", formatAlpha(r.Settings.Alpha), mc.Size)
	if r.Settings.Alternative != "two-sided" {
		rule = fmt.Sprintf("1 - 2 × %s / %d, the one-sided test's two-sided level", formatAlpha(r.Settings.Alpha), mc.Size)
	}
	return fmt.Sprintf(" Bonferroni also gives simultaneous intervals: each difference gets a %s interval (%s), and they all hold at once with at least %s confidence.",
		formatLevel(level), rule, formatLevel(r.Settings.ConfidenceLevel))
}

// adjustedRow is the comparison table's "Adjusted p-value" cell.
func adjustedRow(m experiment.MetricReadout, c experiment.Comparison) string {
	adj := c.Adjusted
	by := decider(c.DecidedBy, c.Z, c.Exact)
	switch {
	case by == "":
		return "n/a (no test was run)"
	case adj == nil && m.Guardrail != nil:
		return "n/a: guardrail comparisons are outside the multiple-comparison family"
	case adj == nil:
		return "n/a: outside the multiple-comparison family"
	case !adjusts(adj.Method):
		return "not adjusted (adjustment none)"
	}
	p := decisionP(c.DecidedBy, c.Z, c.Exact)
	alpha := decisionAlpha(c.DecidedBy, c.Z, c.Exact)
	return fmt.Sprintf("%s over %s, from %s (%s): adjusted %s: %s",
		adjustmentName(adj.Method), overFamily(adj), pIs(p), by,
		pAgainst(adj.PValue, alpha), rejectText(adj.Significant))
}

// simultaneousRow is the comparison table's "Simultaneous interval" cell.
func simultaneousRow(c experiment.Comparison) string {
	if c.Adjusted == nil || c.Adjusted.DifferenceInterval == nil {
		return "n/a"
	}
	iv := c.Adjusted.DifferenceInterval
	zero := "includes 0"
	if iv.Lower > 0 || iv.Upper < 0 {
		zero = "excludes 0"
	}
	return fmt.Sprintf("%s CI %s to %s pp (%s at %s): %s",
		formatLevel(iv.Level), formatPoints(iv.Lower), formatPoints(iv.Upper), iv.Method,
		levelRule(iv.Level, decisionAlpha(c.DecidedBy, c.Z, c.Exact), c.Adjusted.FamilySize), zero)
}

func hasSimultaneous(m experiment.MetricReadout) bool {
	for _, c := range m.Comparisons {
		if c.Adjusted != nil && c.Adjusted.DifferenceInterval != nil {
			return true
		}
	}
	return false
}

// decisionP is the p-value of the test that decided.
func decisionP(decidedBy string, z *experiment.Test, e *experiment.ExactTest) float64 {
	switch {
	case decidedBy == "exact_test" && e != nil:
		return e.PValue
	case z != nil:
		return z.PValue
	case e != nil:
		return e.PValue
	}
	return 0
}

// multiplicityCaution is the "Before acting" item on multiple
// comparisons, or "" when the readout makes at most one test.
func multiplicityCaution(r experiment.Readout) string {
	mc := r.Multiplicity
	o := countOutside(r)
	alphas := decisionAlphas(r)
	each := "each at its own alpha"
	if len(alphas) == 1 {
		each = "each at alpha " + formatAlpha(alphas[0])
	}
	inFamily := 0
	for _, m := range r.Metrics {
		for _, c := range m.Comparisons {
			if c.Adjusted != nil {
				inFamily++
			}
		}
	}
	if !adjusts(mc.Method) || inFamily == 0 {
		k := inFamily + o.total()
		if k <= 1 {
			return ""
		}
		return fmt.Sprintf("This readout makes %d tests, %s, with no adjustment for multiple comparisons; the more tests, the likelier one is significant by chance.", k, each)
	}
	metrics, _, _ := familyMembers(r, experiment.Primary)
	var b strings.Builder
	if len(metrics) > 0 {
		fmt.Fprintf(&b, "Multiple comparisons: the %s with the control on %s were adjusted together by the %s method, which keeps %s at alpha %s; the decisions above are the adjusted ones",
			Plural(int64(mc.Size), "comparison", "comparisons"), joinAnd(metrics), adjustmentName(mc.Method),
			errorRateText(mc.ErrorRate), formatAlpha(r.Settings.Alpha))
		if k := changedByAdjustment(r, experiment.Primary); k > 0 {
			fmt.Fprintf(&b, " (%d %s significant only before adjustment)", k, PluralWord(int64(k), "was", "were"))
		}
		b.WriteString(".")
	}
	if sec := r.SecondaryMultiplicity; sec != nil && sec.Size > 0 {
		metrics, _, _ := familyMembers(r, experiment.Secondary)
		if b.Len() > 0 {
			b.WriteString(" ")
		}
		fmt.Fprintf(&b, "The %s on the secondary %s %s were adjusted apart, in a family of their own by the same method",
			Plural(int64(sec.Size), "comparison", "comparisons"), PluralWord(int64(len(metrics)), "metric", "metrics"), joinAnd(metrics))
		if k := changedByAdjustment(r, experiment.Secondary); k > 0 {
			fmt.Fprintf(&b, " (%d %s significant only before adjustment)", k, PluralWord(int64(k), "was", "were"))
		}
		b.WriteString("; they never change the decision.")
	}
	if o.total() > 0 {
		fmt.Fprintf(&b, " Outside the %s, %s on its own: %s; the more of them, the likelier one is significant by chance.",
			PluralWord(int64(len(r.Families())), "family", "families"), each, o.text())
	}
	return b.String()
}

// decisionAlphas lists the distinct alphas of every decision in the
// readout: comparisons, target tests and guardrail tests.
func decisionAlphas(r experiment.Readout) []float64 {
	var alphas []float64
	add := func(a float64) {
		for _, b := range alphas {
			if a == b {
				return
			}
		}
		alphas = append(alphas, a)
	}
	for _, m := range r.Metrics {
		for _, c := range m.Comparisons {
			if decider(c.DecidedBy, c.Z, c.Exact) != "" {
				add(decisionAlpha(c.DecidedBy, c.Z, c.Exact))
			}
			if ni := c.NonInferiority; ni != nil && ni.Z != nil {
				add(ni.Z.Alpha)
			}
		}
		for _, a := range m.Arms {
			if tt := a.TargetTest; tt != nil && decider(tt.DecidedBy, tt.Z, tt.Exact) != "" {
				add(decisionAlpha(tt.DecidedBy, tt.Z, tt.Exact))
			}
		}
	}
	return alphas
}

// capitalize upper-cases the first letter.
func capitalize(s string) string {
	if s == "" {
		return s
	}
	return strings.ToUpper(s[:1]) + s[1:]
}
