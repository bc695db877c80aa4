// The per-metric segment table of the Markdown readout.

package report

import (
	"fmt"

	"github.com/armtally/armtally/experiment"
)

// inputName names an input shape in words.
func inputName(input string) string {
	switch input {
	case "event_log", "":
		return "event log"
	case "unit_table":
		return "unit table"
	case "counts":
		return "counts"
	}
	return input
}

// segmentLabel prints "`platform` = `ios`", or "`platform` = (null)" for
// the null value (plain, so that it cannot be mistaken for a value
// spelled "(null)").
func segmentLabel(s experiment.SegmentResult) string {
	if s.Value == nil {
		return code(s.Dimension) + " = " + experiment.NullSegmentText
	}
	return code(s.Dimension) + " = " + code(*s.Value)
}

// segments writes a metric's exploratory segment table: one row per
// segment value and arm, the treatments' rows with their difference from
// the control in the same segment.
func (md *markdown) segments(r experiment.Readout, m experiment.MetricReadout) {
	md.heading(2, "By segment (exploratory)")
	md.para(fmt.Sprintf("Each treatment against the control within each segment, at alpha %s on its own (no adjustment, outside the multiple-comparison family), intervals at %s. A segment result is a lead to test, not a finding.",
		formatAlpha(r.Settings.Alpha), formatLevel(r.Settings.ConfidenceLevel)))
	var rows [][]string
	for _, s := range m.Segments {
		label := segmentLabel(s)
		for _, a := range s.Arms {
			rate := "n/a (no units)"
			if a.Rate != nil {
				rate = formatPercent(*a.Rate)
				if iv := a.Interval; iv != nil {
					rate += " (" + formatPercent(iv.Lower) + " to " + formatPercent(iv.Upper) + ")"
				}
			}
			row := []string{label, armLabel(a.Arm, r.Control), FormatCount(a.Units), FormatCount(a.Conversions), rate}
			c := segmentComparison(s, a.Arm)
			if c == nil {
				row = append(row, "", "", "", "")
				rows = append(rows, row)
				continue
			}
			diff, lift := "n/a", "n/a"
			if c.Difference != nil {
				diff = formatPoints(*c.Difference) + " pp"
				if iv := c.DifferenceInterval; iv != nil {
					diff += " (" + formatPoints(iv.Lower) + " to " + formatPoints(iv.Upper) + ")"
				}
			}
			if c.RelativeLift != nil {
				lift = formatSignedPercent(*c.RelativeLift)
				if iv := c.LiftInterval; iv != nil {
					lift += " (" + formatSignedPercent(iv.Lower) + " to " + formatSignedPercent(iv.Upper) + ")"
				}
			}
			row = append(row, diff, lift, segmentTest(*c), segmentDecision(*c))
			rows = append(rows, row)
		}
	}
	md.table([]string{"Segment", "Arm", "Units", "Conversions", "Rate (interval)", "Difference vs control (interval)", "Relative lift (interval)", "Test", "Unadjusted decision"},
		"llrrrllll", rows)
}

// segmentComparison returns the comparison of treatment arm in s, nil for
// the control.
func segmentComparison(s experiment.SegmentResult, arm string) *experiment.Comparison {
	for i := range s.Comparisons {
		if s.Comparisons[i].Treatment == arm {
			return &s.Comparisons[i]
		}
	}
	return nil
}

// segmentTest names the test relied on and its p-value.
func segmentTest(c experiment.Comparison) string {
	switch {
	case c.DecidedBy == experiment.DecidedByExact && c.Exact != nil:
		return c.Exact.Method + " (too few conversions or non-conversions for z), " + pIs(c.Exact.PValue)
	case c.Z != nil:
		return fmt.Sprintf("z = %s, %s", formatStatistic(c.Z.Statistic), pIs(c.Z.PValue))
	}
	return "n/a (an arm has no units)"
}

func segmentDecision(c experiment.Comparison) string {
	switch {
	case decider(c.DecidedBy, c.Z, c.Exact) == "":
		return "no test"
	case c.SignificantUnadjusted:
		return "significant (unadjusted)"
	}
	return "not significant"
}
