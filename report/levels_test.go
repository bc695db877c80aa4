package report

import (
	"regexp"
	"strings"
	"testing"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/stats"
)

// levelReadout analyses a three-arm, two-metric experiment with a
// guardrail under one adjustment and alternative. The counts are
// invented; the test below compares the readout with itself, prose
// against tables, so no value of it is asserted.
func levelReadout(t *testing.T, adjust stats.AdjustMethod, alt stats.Alternative) experiment.Readout {
	t.Helper()
	spec := experiment.Spec{Control: "ctl", Arms: []string{"ctl", "a", "b"},
		Metrics: []experiment.Metric{
			{Name: "m1", Events: []string{"e1"}},
			{Name: "m2", Events: []string{"e2"}},
			{Name: "g", Events: []string{"e3"}, Guardrail: &experiment.Margin{Value: 0.01}},
		}}
	arm := func(name string, n int64, x ...int64) experiment.ArmTally {
		a := experiment.ArmTally{Name: name, Units: n}
		for _, c := range x {
			a.Metrics = append(a.Metrics, experiment.Count{Units: n, Conversions: c})
		}
		return a
	}
	tl := experiment.Tally{Arms: []experiment.ArmTally{
		arm("ctl", 5000, 500, 200, 2500),
		arm("a", 5000, 590, 230, 2480),
		arm("b", 5000, 470, 190, 2510),
	}}
	opts := experiment.DefaultAnalysisOptions()
	opts.Adjust = adjust
	opts.Stats.Alternative = alt
	r, err := experiment.Analyze(spec, tl, opts)
	if err != nil {
		t.Fatal(err)
	}
	return r
}

var (
	levelRE = regexp.MustCompile(`(\d+(?:\.\d+)?)% CI`)
	countRE = regexp.MustCompile(`over (\d+) comparisons`)
)

// cellsOf returns the table rows of md whose label is label, one string
// per row, in order.
func cellsOf(md, label string) []string {
	var rows []string
	for _, l := range strings.Split(md, "\n") {
		if strings.HasPrefix(l, "| "+label+" |") {
			rows = append(rows, l)
		}
	}
	return rows
}

// allMatches returns the first group of every match of re in each text.
func allMatches(re *regexp.Regexp, texts ...string) []string {
	var out []string
	for _, s := range texts {
		for _, m := range re.FindAllStringSubmatch(s, -1) {
			out = append(out, m[1])
		}
	}
	return out
}

// sectionOf returns the text of md from the line that starts with start
// up to the next line starting with "## " (or the end).
func sectionOf(md, start string) string {
	_, rest, ok := strings.Cut(md, "\n"+start)
	if !ok {
		return ""
	}
	if i := strings.Index(rest, "\n## "); i >= 0 {
		rest = rest[:i]
	}
	return rest
}

// TestProseLevelsMatchTables checks, for every adjustment method and
// alternative, that each level and count the prose quotes is the one the
// tables print: the settings line's confidence level and the interval
// level line against the difference and lift cells, the conclusions'
// levels against their comparison's cells, the multiple-comparison
// paragraph's family size and simultaneous level against the Adjusted
// p-value and Simultaneous interval cells, the guardrail definition's
// level against the guardrail table, and the summary's levels against
// the difference cells. Consistency of the readout with itself; no
// external value is involved.
func TestProseLevelsMatchTables(t *testing.T) {
	for _, adjust := range []stats.AdjustMethod{stats.None, stats.Bonferroni, stats.Holm, stats.Hochberg, stats.BenjaminiHochberg, stats.BenjaminiYekutieli} {
		for _, alt := range []stats.Alternative{stats.TwoSided, stats.Greater, stats.Less} {
			t.Run(adjust.String()+"/"+alt.String(), func(t *testing.T) {
				md := render1(t, levelReadout(t, adjust, alt))
				checkProseLevels(t, md, adjust)
			})
		}
	}
}

func checkProseLevels(t *testing.T, md string, adjust stats.AdjustMethod) {
	t.Helper()
	diffs := allMatches(levelRE, append(cellsOf(md, "Difference"), cellsOf(md, "Relative lift")...)...)
	if len(diffs) == 0 {
		t.Fatalf("no difference interval in the tables:\n%s", md)
	}
	level := diffs[0]
	for _, l := range diffs {
		if l != level {
			t.Fatalf("the tables mix levels %s%% and %s%%", level, l)
		}
	}
	want := func(where, got, table string) {
		t.Helper()
		if got != table {
			t.Errorf("%s says %s, the table %s", where, got, table)
		}
	}
	settings := regexp.MustCompile(`Settings: alpha [0-9.]+, (\d+(?:\.\d+)?)% confidence intervals`).FindStringSubmatch(md)
	if settings == nil {
		t.Fatal("no settings line")
	}
	want("the settings line", settings[1]+"%", level+"%")
	if m := regexp.MustCompile(`Interval level: .* two-sided at (\d+(?:\.\d+)?)%`).FindStringSubmatch(md); m != nil {
		want("the interval level line", m[1]+"%", level+"%")
	}
	// Each conclusion that is not a guardrail's quotes the level of its
	// comparison's difference and lift.
	for _, l := range strings.Split(md, "\n") {
		if strings.HasPrefix(l, "- `") && strings.Contains(l, " CI ") {
			for _, got := range allMatches(levelRE, strings.SplitN(l, "simultaneous", 2)[0]) {
				want("the conclusion "+l, got+"%", level+"%")
			}
		}
	}
	// The family: the paragraph's size against the Adjusted p-value cells.
	para := sectionOf(md, "## Multiple comparisons")
	tableCounts := allMatches(countRE, cellsOf(md, "Adjusted p-value")...)
	if adjust != stats.None {
		m := regexp.MustCompile(`over a family of (\d+) comparisons`).FindStringSubmatch(para)
		if m == nil {
			t.Fatalf("no family size in:\n%s", para)
		}
		if len(tableCounts) == 0 {
			t.Fatal("no family size in the Adjusted p-value cells")
		}
		for _, c := range tableCounts {
			want("the multiple-comparison paragraph's family size", m[1], c)
		}
		if m := regexp.MustCompile(`the (\d+) comparisons with the control`).FindStringSubmatch(md); m != nil {
			want("the caution's family size", m[1], tableCounts[0])
		}
	}
	// Bonferroni's simultaneous intervals.
	sim := allMatches(levelRE, cellsOf(md, "Simultaneous interval")...)
	m := regexp.MustCompile(`each difference gets a (\d+(?:\.\d+)?)% interval \(([^)]*)\), and they all hold at once with at least (\d+(?:\.\d+)?)% confidence`).FindStringSubmatch(para)
	switch {
	case adjust == stats.Bonferroni && (m == nil || len(sim) == 0):
		t.Fatalf("Bonferroni without its simultaneous level in the prose or the table:\n%s", md)
	case adjust != stats.Bonferroni && (m != nil || len(sim) > 0):
		t.Fatalf("%v quotes simultaneous intervals", adjust)
	case m != nil:
		for _, s := range sim {
			want("the simultaneous level", m[1]+"%", s+"%")
		}
		want("the joint level", m[3]+"%", level+"%")
		rule, _, _ := strings.Cut(m[2], ",")
		for _, row := range cellsOf(md, "Simultaneous interval") {
			if !strings.Contains(row, "at "+rule+")") {
				t.Errorf("the prose's rule %q is not the table's: %s", rule, row)
			}
		}
	}
	// The guardrail definition against its table.
	g := sectionOf(md, "## Metric `g`")
	gm := regexp.MustCompile(`of its (\d+(?:\.\d+)?)% interval`).FindStringSubmatch(g)
	if gm == nil {
		t.Fatalf("no guardrail level in:\n%s", g)
	}
	guard := allMatches(levelRE, cellsOf(g, "Interval against the margin")...)
	for _, l := range guard {
		want("the guardrail definition", gm[1]+"%", l+"%")
	}
	checkSummaryLevels(t, md, level, guard[0])
}

// checkSummaryLevels checks the summary table's interval levels against
// the tables': a guardrail row quotes its non-inferiority interval's
// level, every other row its difference interval's.
func checkSummaryLevels(t *testing.T, md, level, guard string) {
	t.Helper()
	head, _, _ := strings.Cut(md, "\n## ")
	n := 0
	for _, l := range strings.Split(head, "\n") {
		if !strings.HasPrefix(l, "| ") {
			continue
		}
		for _, q := range allMatches(levelRE, l) {
			n++
			table := level
			if strings.Contains(l, "| guardrail") {
				table = guard
			}
			if q != table {
				t.Errorf("the summary row %q quotes %s%%, the table %s%%", l, q, table)
			}
		}
	}
	if n == 0 {
		t.Errorf("the summary quotes no level:\n%s", head)
	}
}
