// The sections of the Markdown readout, in the order WriteMarkdown writes
// them: header, warnings, arms, multiple comparisons, metrics, cautions,
// diagnostics.

package report

import (
	"fmt"
	"strings"
	"unicode"

	"github.com/armtally/armtally/experiment"
)

func (md *markdown) readout(r experiment.Readout) {
	md.heading(0, readoutTitle(r))
	md.summary(r)
	md.monitoring(r)
	if md.opts.Brief {
		md.warnings(r)
		if !md.opts.OmitCautions {
			md.cautions(r)
		}
		return
	}
	md.heading(1, "Setup")
	md.header(r)
	md.warnings(r)
	md.arms(r)
	md.multiplicity(r)
	md.chartLink(r)
	for _, m := range r.Metrics {
		md.metric(r, m)
	}
	if !md.opts.OmitCautions {
		md.cautions(r)
	}
	md.diagnostics(r)
}

// readoutTitle is the readout's heading: "Experiment `key`", or, for
// rows without an experiment key, "Experiment readout" with the arms
// compared.
func readoutTitle(r experiment.Readout) string {
	if r.Experiment != "" {
		return "Experiment " + code(r.Experiment)
	}
	var names []string
	for _, a := range r.Arms {
		names = append(names, code(a.Name))
	}
	if len(names) == 0 {
		return "Experiment readout (no experiment key)"
	}
	return "Experiment readout: " + joinAnd(names) + " (no experiment key)"
}

func (md *markdown) header(r experiment.Readout) {
	s := r.Settings
	md.line("- Control arm: " + code(r.Control))
	md.line("- Exposure event: " + code(r.ExposureEvent))
	md.line("- Analysis window: " + window(r))
	fresh := "no valid rows were read"
	switch {
	case r.Freshness != nil:
		fresh = "newest valid row at " + formatTime(*r.Freshness)
	case r.Diagnostics.Input == "unit_table":
		fresh = "not known (a unit table carries no conversion times)"
	case r.Diagnostics.Input == "counts":
		fresh = "not known (counts carry no times)"
	}
	md.line("- Data freshness: " + fresh)
	md.line(fmt.Sprintf("- Settings: alpha %s, %s confidence intervals, %s tests; multi-arm units: %s; immature units: %s; normal approximation when each arm has at least %s conversions and %s non-conversions; sample-ratio threshold %s",
		formatAlpha(s.Alpha), formatLevel(s.ConfidenceLevel), alternativeName(s.Alternative),
		s.MultiArmPolicy, s.MaturityPolicy, FormatCount(s.MinCount), FormatCount(s.MinCount),
		formatAlpha(s.SampleRatioThreshold)))
	md.line("- Methods: " + methods(r))
	if s.Alternative == "greater" || s.Alternative == "less" {
		bound := "lower"
		if s.Alternative == "less" {
			bound = "upper"
		}
		md.line(fmt.Sprintf("- Interval level: the tests are %s, so every interval of a rate, difference or lift is two-sided at %s (1 - 2 × alpha): its %s bound is the one-sided %s bound that matches the test.",
			alternativeName(s.Alternative), formatLevel(s.ConfidenceLevel), bound, formatLevel(1-s.Alpha)))
	}
	md.line("")
}

// methods names the interval methods, the multiple-comparison adjustment
// and, when a metric is a guardrail, the non-inferiority test.
func methods(r experiment.Readout) string {
	s := r.Settings
	given := func(m string) string {
		if m == "" {
			return "(not given)"
		}
		return m
	}
	text := fmt.Sprintf("%s intervals for rates, %s for differences, %s for relative lifts; multiple comparisons: %s",
		given(s.IntervalMethod), given(s.DifferenceIntervalMethod), given(s.LiftIntervalMethod), adjustmentName(s.Adjustment)+" adjustment")
	for _, m := range r.Metrics {
		if m.Guardrail != nil {
			text += "; guardrails: non-inferiority z test (" + given(s.NonInferiorityMethod) + ")"
			break
		}
	}
	return text
}

func window(r experiment.Readout) string {
	switch {
	case r.WindowStart == nil && r.WindowEnd == nil:
		return "unbounded (all data)"
	case r.WindowStart == nil:
		return "unbounded start to " + formatTime(*r.WindowEnd) + " (exclusive)"
	case r.WindowEnd == nil:
		return "from " + formatTime(*r.WindowStart) + " (inclusive), end unbounded"
	}
	return "from " + formatTime(*r.WindowStart) + " (inclusive) to " + formatTime(*r.WindowEnd) + " (exclusive)"
}

func alternativeName(a string) string {
	switch a {
	case "greater":
		return "one-sided (treatment higher)"
	case "less":
		return "one-sided (treatment lower)"
	case "two-sided", "":
		return "two-sided"
	}
	return a
}

// warnings writes the block of readout-wide warnings (warningList).
func (md *markdown) warnings(r experiment.Readout) {
	list := noticeTexts(readoutNotices(r, markdownNotices))
	if len(list) == 0 {
		return
	}
	md.line("> **Warnings**")
	md.line(">")
	for i, w := range list {
		md.line(fmt.Sprintf("> %d. %s", i+1, oneLine(w)))
	}
	md.line("")
}

// groups collects members under keys, both in first-seen order.
type groups []struct {
	key     string
	members []string
}

func (g *groups) add(key, member string) {
	for i := range *g {
		if (*g)[i].key == key {
			(*g)[i].members = append((*g)[i].members, member)
			return
		}
	}
	*g = append(*g, struct {
		key     string
		members []string
	}{key, []string{member}})
}

// testRun reports whether any test was run; with no test (an arm without
// units) the conditions are moot.
func testRun(z *experiment.Test, e *experiment.ExactTest) bool {
	return z != nil || e != nil
}

const routesDisagree = "the statistic and the p-value routes of the z test disagree, which should not happen; report it as a bug."

func unitsWere(n int64) string {
	if n == 1 {
		return "unit was"
	}
	return "units were"
}

func exactFallback(e *experiment.ExactTest) string {
	if e == nil {
		return "no exact test was run"
	}
	return "decided by " + theMethod(e.Method)
}

// theMethod puts "the" before a method name that is not a proper name:
// "the exact binomial test" but "Fisher's exact test".
func theMethod(m string) string {
	if m != "" && unicode.IsLower([]rune(m)[0]) {
		return "the " + m
	}
	return m
}

// disagreement says how the difference interval and the test disagree.
func disagreement(c experiment.Comparison) string {
	iv := c.DifferenceInterval
	if iv == nil {
		return "the interval for the difference and the test disagree"
	}
	excludes := iv.Lower > 0 || iv.Upper < 0
	level := formatLevel(iv.Level)
	test := "the test"
	if c.Adjusted != nil && adjusts(c.Adjusted.Method) {
		test = "the test before adjustment"
	}
	switch {
	case excludes && !c.SignificantUnadjusted:
		return "the " + level + " interval for the difference excludes 0 but " + test + " is not significant (the interval is not pooled, the test is); a borderline result"
	case !excludes && c.SignificantUnadjusted:
		return test + " is significant but the " + level + " interval for the difference includes 0 (the interval is not pooled, the test is); a borderline result"
	}
	return "the " + level + " interval for the difference and the test disagree"
}

func (md *markdown) arms(r experiment.Readout) {
	md.heading(1, "Arms")
	rows := make([][]string, 0, len(r.Arms))
	for _, a := range r.Arms {
		rows = append(rows, []string{armLabel(a.Name, r.Control), FormatCount(a.Units), formatShare(a.PlannedShare), formatShare(a.ObservedShare)})
	}
	md.table([]string{"Arm", "Units", "Planned share", "Observed share"}, "lrrr", rows)
	sr := r.SampleRatio
	if !sr.Checked {
		md.para("Sample ratio: not checked (fewer than two arms have units).")
		return
	}
	verdict := "no mismatch"
	if sr.Mismatch {
		verdict = "**mismatch**"
	}
	md.para(fmt.Sprintf("Sample ratio (%s): chi-square = %s, df = %d, %s: %s.",
		sr.Method, formatStatistic(sr.Statistic), sr.DF, pAgainstStrict(sr.PValue, sr.Threshold), verdict))
}

func armLabel(name, control string) string {
	if name == control {
		return code(name) + " (control)"
	}
	return code(name)
}

func (md *markdown) metric(r experiment.Readout, m experiment.MetricReadout) {
	md.heading(1, metricTitle(m))
	md.para(metricDefinition(r, m))
	if m.Guardrail != nil {
		md.para(guardrailDefinition(r, m))
	}
	n := newNotes()

	md.armRates(r, m)
	n.add(warningTexts(m.Warnings)...)
	n.flush(md)

	if m.Guardrail != nil && len(m.Comparisons) > 0 {
		md.heading(2, "Guardrail: non-inferiority against control")
		md.guardrails(r, m, n)
	}
	if len(m.Comparisons) > 0 {
		md.heading(2, "Against control")
		md.comparisons(r, m, n)
	}
	if hasTargetTests(m) {
		target := "the target rate"
		if m.Target != nil {
			target += " " + formatPercent(*m.Target)
		}
		md.heading(2, "Against "+target)
		md.targetTests(r, m, n)
	}
	md.conclusion(r, m)
	if len(m.Segments) > 0 {
		md.segments(r, m)
	}
}

// armRates writes a metric's table of arms. The interval method and the
// immature units get a column only when they are not the same for every
// arm as the header says (the rate method at the confidence level; no
// immature unit).
func (md *markdown) armRates(r experiment.Readout, m experiment.MetricReadout) {
	usual := r.Settings.IntervalMethod + ", " + formatLevel(r.Settings.ConfidenceLevel)
	showMethod, showImmature := false, false
	rows := make([][]string, 0, len(m.Arms))
	for _, a := range m.Arms {
		rate, interval, method := "n/a (no units)", "n/a", "n/a"
		if a.Rate != nil {
			rate = formatPercent(*a.Rate)
		}
		if a.Interval != nil {
			interval = formatPercent(a.Interval.Lower) + " to " + formatPercent(a.Interval.Upper)
			method = a.Interval.Method + ", " + formatLevel(a.Interval.Level)
		}
		showMethod = showMethod || (a.Interval != nil && method != usual)
		showImmature = showImmature || a.Immature != 0
		rows = append(rows, []string{armLabel(a.Arm, r.Control), FormatCount(a.Units), FormatCount(a.Conversions), rate, interval, method, FormatCount(a.Immature)})
	}
	header := []string{"Arm", "Units", "Conversions", "Rate", usual + " interval", "Interval method", "Immature (left out)"}
	align := "lrrrrlr"
	keep := []bool{true, true, true, true, true, showMethod, showImmature}
	if showMethod {
		header[4] = "Interval"
	}
	md.table(pick(header, keep), pickAlign(align, keep), pickRows(rows, keep))
}

// pick keeps the cells whose keep is true.
func pick(cells []string, keep []bool) []string {
	var out []string
	for i, c := range cells {
		if keep[i] {
			out = append(out, c)
		}
	}
	return out
}

func pickAlign(align string, keep []bool) string {
	var b strings.Builder
	for i := range keep {
		if keep[i] {
			b.WriteByte(align[i])
		}
	}
	return b.String()
}

func pickRows(rows [][]string, keep []bool) [][]string {
	out := make([][]string, len(rows))
	for i, r := range rows {
		out[i] = pick(r, keep)
	}
	return out
}

func metricDefinition(r experiment.Readout, m experiment.MetricReadout) string {
	events := make([]string, len(m.Events))
	for i, e := range m.Events {
		events[i] = code(e)
	}
	var b strings.Builder
	b.WriteString("A unit converts on ")
	switch len(events) {
	case 0:
		b.WriteString("no event (no events listed)")
	case 1:
		b.WriteString(events[0])
	default:
		b.WriteString("any of " + strings.Join(events, ", "))
	}
	if m.WindowSeconds == nil {
		b.WriteString(" at any time after its first exposure.")
	} else {
		w := formatDuration(*m.WindowSeconds)
		b.WriteString(" within " + w + " of its first exposure.")
		if r.Settings.MaturityPolicy == "include" {
			b.WriteString(" Units whose " + w + " had not passed are kept (maturity policy include).")
		} else {
			b.WriteString(" Units whose " + w + " had not passed are left out (maturity policy exclude).")
		}
	}
	if m.Target != nil {
		b.WriteString(" Target rate: " + formatPercent(*m.Target) + ".")
	}
	if m.LowerIsBetter && m.Guardrail == nil {
		b.WriteString(" Lower is better for this metric: a negative difference is an improvement.")
	}
	return b.String()
}

func hasTargetTests(m experiment.MetricReadout) bool {
	for _, a := range m.Arms {
		if a.TargetTest != nil {
			return true
		}
	}
	return false
}

// rateOf returns the metric's rate for arm, or nil.
func rateOf(m experiment.MetricReadout, arm string) *experiment.ArmRate {
	for i := range m.Arms {
		if m.Arms[i].Arm == arm {
			return &m.Arms[i]
		}
	}
	return nil
}

// pairName names a comparison's column: "`b` vs `a`".
func pairName(c experiment.Comparison) string {
	return code(c.Treatment) + " vs " + code(c.Control)
}

// pairRates returns the rates of a comparison's treatment and control,
// and its difference in points, or why it is undefined.
func pairRates(m experiment.MetricReadout, c experiment.Comparison) (t, ctl *experiment.ArmRate, diff string) {
	t, ctl = rateOf(m, c.Treatment), rateOf(m, c.Control)
	if c.Difference == nil {
		return t, ctl, "undefined (" + noUnits(t, ctl, c) + ")"
	}
	return t, ctl, formatPoints(*c.Difference) + " pp"
}

func rateText(a *experiment.ArmRate) string {
	if a == nil || a.Rate == nil {
		return "n/a"
	}
	return formatPercent(*a.Rate)
}

// comparisons writes the table of each treatment against the control.
func (md *markdown) comparisons(r experiment.Readout, m experiment.MetricReadout, n *notes) {
	k := len(m.Comparisons)
	rows := append([]detailRow{{label: "Difference"}, {label: "Relative lift"}},
		testRows("in each arm", "in every comparison")...)
	rows = append(rows,
		detailRow{label: "Interval and test", usual: "agree", fold: sentence("Intervals and tests agree.")},
		detailRow{label: "Adjusted p-value"},
	)
	if hasSimultaneous(m) {
		rows = append(rows, detailRow{label: "Simultaneous interval"})
	}
	rows = append(rows,
		detailRow{label: "Decision"},
		detailRow{label: "Notes", usual: "none", fold: sentence("No notes.")},
	)
	header := make([]string, 0, k)
	for _, c := range m.Comparisons {
		header = append(header, pairName(c))
		_, ctl, diff := pairRates(m, c)
		if c.Difference != nil {
			diff += intervalText(c.DifferenceInterval, r.Settings.DifferenceIntervalMethod, formatPPRange)
		}
		lift := "undefined (" + liftUndefined(ctl, c) + ")"
		if c.RelativeLift != nil {
			lift = formatSignedPercent(*c.RelativeLift) + intervalText(c.LiftInterval, r.Settings.LiftIntervalMethod, percentRange)
		}
		method, routes := zCells(c.Z)
		agree := "agree"
		if !c.IntervalAgrees {
			agree = "disagree: " + disagreement(c)
		}
		cells := []string{
			diff,
			lift,
			method,
			routes,
			conditionText(c.ConditionMet, "in each arm", c.Z, c.Exact),
			exactText(c.Exact, c.ConditionMet),
			agree,
			adjustedRow(m, c),
		}
		if hasSimultaneous(m) {
			cells = append(cells, simultaneousRow(c))
		}
		cells = append(cells, decisionCell(readoutVerdict(r), m, c), n.addTest(c.Z, c.Warnings))
		for i := range rows {
			rows[i].cells = append(rows[i].cells, cells[i])
		}
	}
	md.detailTable(header, rows)
	n.flush(md)
}

// testRows are the rows of a detail table on its tests: the test, both
// routes, the normal approximation's condition (checked where) and the
// exact test; the condition and the exact test fold into one sentence
// when the condition holds in every column (each).
func testRows(where, each string) []detailRow {
	return []detailRow{
		{label: "Test", fold: func(c string) string { return "Test: the " + c + "." }},
		{label: "z test, both routes"},
		{label: "Normal approximation", usual: conditionText(true, where, &experiment.Test{}, nil),
			fold: sentence("Normal approximation justified " + each + " (enough conversions and non-conversions " + where + "), so no exact test was needed.")},
		{label: "Exact test", usual: exactText(nil, true), fold: sentence("")},
	}
}

// intervalText is an interval after its estimate: " (95% CI +0.45 to
// +2.58 pp)", with the method when it is not the one the header names.
func intervalText(iv *experiment.Interval, usual string, rng func(lo, hi float64) string) string {
	if iv == nil {
		return ""
	}
	s := " (" + formatLevel(iv.Level) + " CI " + rng(iv.Lower, iv.Upper)
	if iv.Method != usual {
		s += ", " + iv.Method
	}
	return s + ")"
}

// percentRange prints an interval of a lift: "+4.26% to +26.93%".
func percentRange(lo, hi float64) string {
	return formatSignedPercent(lo) + " to " + formatSignedPercent(hi)
}

func (md *markdown) targetTests(r experiment.Readout, m experiment.MetricReadout, n *notes) {
	unreadable := readoutVerdict(r).Decision == experiment.DecisionFixData
	rows := append([]detailRow{{label: "Rate"}, {label: "Difference from target"}},
		testRows("expected under the target", "for every arm")...)
	rows = append(rows, detailRow{label: "Decision"}, detailRow{label: "Notes", usual: "none", fold: sentence("No notes.")})
	var header []string
	for i := range m.Arms {
		a := &m.Arms[i]
		tt := a.TargetTest
		if tt == nil {
			continue
		}
		header = append(header, code(a.Arm))
		diff := "n/a"
		if a.Rate != nil {
			diff = formatPP(*a.Rate - tt.Target)
		}
		method, routes := zCells(tt.Z)
		decision := decisionText(tt.Significant, tt.DecidedBy, tt.Z, tt.Exact)
		if unreadable && decider(tt.DecidedBy, tt.Z, tt.Exact) != "" {
			decision = notReadable
		}
		cells := []string{
			rateText(a) + " vs " + formatPercent(tt.Target),
			diff,
			method, routes,
			conditionText(tt.ConditionMet, "expected under the target", tt.Z, tt.Exact),
			exactText(tt.Exact, tt.ConditionMet),
			decision,
			n.addTest(tt.Z, tt.Warnings),
		}
		for i := range rows {
			rows[i].cells = append(rows[i].cells, cells[i])
		}
	}
	md.detailTable(header, rows)
	n.flush(md)
}

func noUnits(t, ctl *experiment.ArmRate, c experiment.Comparison) string {
	tNone := t == nil || t.Rate == nil
	cNone := ctl == nil || ctl.Rate == nil
	switch {
	case tNone && cNone:
		return "neither arm has units"
	case t == nil || t.Rate == nil:
		return code(c.Treatment) + " has no units"
	case ctl == nil || ctl.Rate == nil:
		return code(c.Control) + " has no units"
	}
	return "not computed"
}

func liftUndefined(ctl *experiment.ArmRate, c experiment.Comparison) string {
	switch {
	case ctl == nil || ctl.Rate == nil:
		return code(c.Control) + " has no units"
	case *ctl.Rate == 0:
		return "control rate is 0"
	}
	return "not computed"
}

func (md *markdown) cautions(r experiment.Readout) {
	md.heading(1, "Before acting")
	md.line("- Statistical significance is not practical importance: judge each interval against the smallest effect that would matter. An interval that reaches effects too small to matter has not shown a useful change.")
	md.line("- Looking at the results repeatedly and stopping when they first look significant inflates false positives. Read the result at the sample size or date fixed in advance.")
	check := "- Check the data before acting: the sample ratio, the exclusions and the diagnostics below."
	if md.opts.Brief {
		check = "- Check the data before acting: the sample ratio, the exclusions and the diagnostics of the full readout."
	}
	if r.SampleRatio.Checked && r.SampleRatio.Mismatch {
		check += " This readout failed the sample ratio check."
	}
	md.line(check)
	if s := multiplicityCaution(r); s != "" {
		md.line("- " + s)
	}
	if s := segmentCaution(r); s != "" {
		md.line("- " + s)
	}
	md.line("")
}

func (md *markdown) diagnostics(r experiment.Readout) {
	d := r.Diagnostics
	md.heading(1, "Diagnostics")
	rows := [][]string{
		{"Input", inputName(d.Input)},
		{"Rows read", FormatCount(d.RowsRead)},
		{"Bad rows", FormatCount(sumReasons(d.BadRows))},
	}
	for _, rc := range d.BadRows {
		rows = append(rows, []string{"Bad rows: " + formatReason(rc.Reason), FormatCount(rc.Count)})
	}
	// Counts cannot show exposure rows or units in two arms.
	unknown := func(n int64) string {
		if d.Input == "counts" {
			return "n/a (not in counts)"
		}
		return FormatCount(n)
	}
	rows = append(rows,
		[]string{"Exposure rows of this experiment (in or out of the window)", unknown(d.ExposureRows)},
		[]string{"Units exposed in the window", FormatCount(d.UnitsExposed)},
	)
	for _, a := range d.UnitsPerArm {
		rows = append(rows, []string{"Units in arm " + armLabel(a.Arm, r.Control), FormatCount(a.Units)})
	}
	rows = append(rows,
		[]string{"Multi-arm units (policy " + r.Settings.MultiArmPolicy + ")", unknown(d.MultiArmUnits)},
		[]string{"Tied units (two arms at the first instant)", unknown(d.TiedUnits)},
	)
	var immature int64
	for _, im := range d.Immature {
		immature += im.Units
	}
	rows = append(rows, []string{"Immature units (policy " + r.Settings.MaturityPolicy + ")", FormatCount(immature)})
	for _, im := range d.Immature {
		if immature > 0 {
			rows = append(rows, []string{"Immature units: " + code(im.Metric), FormatCount(im.Units)})
		}
	}
	rows = append(rows, []string{"Ignored events", FormatCount(sumReasons(d.IgnoredEvents))})
	for _, rc := range d.IgnoredEvents {
		rows = append(rows, []string{"Ignored events: " + formatReason(rc.Reason), FormatCount(rc.Count)})
	}
	md.table([]string{"Count", "Value"}, "lr", rows)
}

func sumReasons(rs []experiment.ReasonCount) int64 {
	var s int64
	for _, r := range rs {
		s += r.Count
	}
	return s
}
