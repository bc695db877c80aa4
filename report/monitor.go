package report

import (
	"fmt"
	"math"
	"strings"

	"github.com/armtally/armtally/experiment"
)

// monitoring writes the section of a monitored run, right after the
// summary: the look, each comparison's sequential test, what changed since
// the previous look and the progress toward the plan (the "how long to
// wait" answer).
func (md *markdown) monitoring(r experiment.Readout) {
	m := r.Monitoring
	if m == nil {
		return
	}
	md.heading(1, "Monitoring")
	md.para(lookLine(m))
	if len(m.Comparisons) > 0 {
		rows := make([][]string, 0, len(m.Comparisons))
		for _, c := range m.Comparisons {
			rows = append(rows, sequentialRow(c))
		}
		md.table([]string{"Metric", "Treatment", "Method", "Look", "Information", "Alpha spent (of)", "Boundary", "Statistic", "Result"}, "llllrrrrl", rows)
		md.para("A fixed-horizon p-value read every night overstates the evidence; the sequential result above is the one that stays valid however often the experiment is read. " +
			"The group-sequential boundary of look j uses the information fractions of looks 1 to j; the mixture test's p-value and confidence sequence are valid at any look. Alpha is split over each family's comparisons before it is spent.")
	}
	notTested := false
	for _, c := range m.Comparisons {
		if c.NotTested != "" {
			md.line(fmt.Sprintf("- %s, %s: not tested at this look: %s.", code(c.Metric), code(c.Treatment), c.NotTested))
			notTested = true
		}
	}
	if notTested {
		md.line("")
	}
	md.fileLink("Chart over the looks: each arm's rate, each treatment's statistic and boundary, new units per day", md.opts.LooksChartPath, r)
	md.para(changesLine(m))
	md.para(progressLine(m))
	if a := m.Alerts; a.Stale {
		md.para(fmt.Sprintf("**Stale data:** %s, more than the allowed %s.", ageWords(a), a.MaxStaleness))
	}
}

func ageWords(a experiment.MonitoringAlerts) string {
	if a.Age == nil {
		return "no valid row was read"
	}
	return "the newest row is " + a.Age.Round(60e9).String() + " old"
}

func lookLine(m *experiment.Monitoring) string {
	key := "the data's freshness"
	if m.KeyKind == "as-of" {
		key = "--as-of"
	}
	s := fmt.Sprintf("Look %d, at %s (keyed by %s)", m.Look, formatTime(m.LookAt), key)
	if m.PreviousAt != nil {
		s += "; previous look at " + formatTime(*m.PreviousAt)
	}
	if !m.History {
		s += ". No history file (--history): this run is taken as the first look, so its boundaries hold only if it is"
	}
	return s + "."
}

func sequentialRow(c experiment.SequentialComparison) []string {
	opt := func(p *float64, f func(float64) string) string {
		if p == nil {
			return "n/a"
		}
		return f(*p)
	}
	method := c.Method + " (" + c.Spending + ", " + c.Sides + ")"
	boundary := opt(c.Boundary, func(b float64) string {
		if math.IsInf(b, 1) {
			return "none left"
		}
		return "|z| ≥ " + formatStatistic(b) + " (p ≤ " + opt(c.BoundaryP, formatPValue) + ")"
	})
	if c.Sides == "one-sided" && c.Boundary != nil {
		boundary = strings.Replace(boundary, "|z|", "z", 1)
	}
	result := "not crossed"
	switch {
	case c.NotTested != "":
		result = "not tested"
	case c.CrossedAtLook > 0 && c.CrossedAtLook < c.Look:
		result = fmt.Sprintf("**crossed at look %d**", c.CrossedAtLook)
	case c.Crossed:
		result = "**crossed**"
	}
	if c.Method == experiment.MethodMixture {
		method = fmt.Sprintf("mixture (tau² %s, two-sided)", opt(c.MixingVariance, formatAlpha))
		boundary = "always-valid p " + opt(c.AlwaysValidP, formatPValue) + "; sequence " +
			opt(c.SequenceLower, func(lo float64) string { return formatPPRange(lo, *c.SequenceUpper) })
	}
	spent := opt(c.AlphaSpent, formatAlpha4) + " (" + formatAlpha(c.Alpha) + ")"
	if c.Method == experiment.MethodMixture {
		spent = "n/a (" + formatAlpha(c.Alpha) + ")"
	}
	return []string{code(c.Metric), code(c.Treatment), method, fmt.Sprint(c.Look), opt(c.InformationFraction, formatPercent),
		spent, boundary, opt(c.Statistic, formatStatistic), result}
}

// formatAlpha4 prints a spent alpha with four significant digits.
func formatAlpha4(a float64) string {
	return fmt.Sprintf("%.4g", a)
}

func changesLine(m *experiment.Monitoring) string {
	if m.PreviousAt == nil {
		return "Changes since the previous look: none to compare (first look)."
	}
	if len(m.Changes) == 0 {
		return "Changes since the previous look: no decision flipped, no estimate moved outside tonight's interval and no new warning."
	}
	var parts []string
	for _, c := range m.Changes {
		if c.Kind == "new_warning" {
			parts = append(parts, "new warning "+code(c.Details))
			continue
		}
		parts = append(parts, fmt.Sprintf("%s, %s: %s (%s)", code(c.Metric), code(c.Treatment), strings.ReplaceAll(c.Kind, "_", " "), c.Details))
	}
	return "Changes since the previous look: " + strings.Join(parts, "; ") + "."
}

func progressLine(m *experiment.Monitoring) string {
	var parts []string
	for _, p := range m.Progress {
		s := code(p.Arm) + " " + FormatCount(p.Units)
		if p.PlannedUnits > 0 {
			s += " of " + FormatCount(p.PlannedUnits) + " planned"
		}
		if p.DailyUnits != nil {
			s += fmt.Sprintf(" (%s a day)", FormatCount(int64(math.Round(*p.DailyUnits))))
		}
		parts = append(parts, s)
	}
	s := "Progress: " + strings.Join(parts, "; ") + "."
	if m.DaysLeft != nil {
		s += fmt.Sprintf(" Days left at the observed rate: %.1f.", *m.DaysLeft)
	} else if m.PlannedUnits == 0 {
		s += " No plan given (--planned-units), so no days left."
	}
	if m.DetectableEffect != nil {
		s += fmt.Sprintf(" Smallest difference on %s a fixed-horizon test detects with 80%% power at the units so far: %s.",
			code(m.DetectableMetric), formatPP(*m.DetectableEffect))
	}
	return s
}

// waitProgress is the "how long to wait" sentence of a monitored run
// whose decision is wait: the smallest arm's units against the plan and
// the days left at the observed rate; "" when not monitored.
func waitProgress(m *experiment.Monitoring) string {
	if m == nil || len(m.Progress) == 0 {
		return ""
	}
	least := m.Progress[0]
	for _, p := range m.Progress[1:] {
		if p.Units < least.Units {
			least = p
		}
	}
	if m.PlannedUnits <= 0 {
		return fmt.Sprintf(" Look %d; the smallest arm has %s units and no plan was given (--planned-units).", m.Look, FormatCount(least.Units))
	}
	s := fmt.Sprintf(" Look %d: the smallest arm has %s of the %s planned units", m.Look, FormatCount(least.Units), FormatCount(m.PlannedUnits))
	if m.DaysLeft != nil {
		s += fmt.Sprintf(", about %.1f days left at the observed rate", *m.DaysLeft)
	}
	return s + " (see Monitoring)."
}

// sequentialCaution names the sequential comparisons that have not
// crossed their boundary, beside a fixed-horizon verdict that is read
// every night; "" when there are none.
func sequentialCaution(m *experiment.Monitoring) string {
	if m == nil {
		return ""
	}
	var open []string
	for _, c := range m.Comparisons {
		if c.CrossedAtLook == 0 {
			open = append(open, code(c.Metric)+" "+code(c.Treatment))
		}
	}
	if len(open) == 0 {
		return ""
	}
	return " The sequential test has not crossed its boundary for " + joinAnd(open) + ": a fixed-horizon result read every night is not yet evidence on its own."
}
