package report

import (
	"bytes"
	"slices"
	"strings"
	"testing"

	"github.com/armtally/armtally/experiment"
)

func TestWriteMarkdownHeadingLevel(t *testing.T) {
	tests := []struct {
		level   int
		want    string // first line
		wantErr bool
	}{
		{level: 0, want: "# Experiment `checkout-button-color`"},
		{level: 1, want: "# Experiment `checkout-button-color`"},
		{level: 3, want: "### Experiment `checkout-button-color`"},
		{level: 4, want: "#### Experiment `checkout-button-color`"},
		{level: 5, wantErr: true},
		{level: -1, wantErr: true},
	}
	for _, tc := range tests {
		t.Run(strings.Repeat("#", max(tc.level, 0)), func(t *testing.T) {
			var buf bytes.Buffer
			err := WriteMarkdown(&buf, []experiment.Readout{twoArmReadout()}, MarkdownOptions{HeadingLevel: tc.level})
			if tc.wantErr {
				if err == nil || buf.Len() != 0 {
					t.Errorf("err %v, %d bytes written; want an error and nothing written", err, buf.Len())
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			first, _, _ := strings.Cut(buf.String(), "\n")
			if first != tc.want {
				t.Errorf("first line %q, want %q", first, tc.want)
			}
		})
	}
}

// TestMarkdownWarningBlock checks when the block of warnings appears and
// what it holds; the golden files show the wording in full.
func TestMarkdownWarningBlock(t *testing.T) {
	tests := []struct {
		name    string
		readout func() experiment.Readout
		want    []string // substrings of the block, in order
		absent  bool
	}{
		{
			name: "nothing to warn about",
			readout: func() experiment.Readout {
				r := twoArmReadout()
				r.Diagnostics.Immature[0].Units = 0
				return r
			},
			absent: true,
		},
		{
			name:    "immature units",
			readout: twoArmReadout,
			want:    []string{"> 1. `purchase`: 400 units were left out"},
		},
		{
			name:    "everything",
			readout: threeArmReadout,
			want: []string{
				"> 1. **Sample ratio mismatch**",
				"> 2. 41 units were exposed to more than one arm",
				"> 3. 3 units were first exposed to two arms at the same instant",
				"> 4. `activated`: 57 units were counted before",
				"> 5. `plan_upgrade`: normal approximation not justified for `short-tour` vs `control`, `long-tour` vs `control`; decided by Fisher's exact test.",
				"> 6. `plan_upgrade`: normal approximation not justified for `control` vs target 0.20%, `short-tour` vs target 0.20%, `long-tour` vs target 0.20%; decided by the exact binomial test.",
				"> 7. `plan_upgrade`, `long-tour` vs `control`: the test before adjustment is significant but the 95% interval",
				"> 8. the analysis window has no end",
			},
		},
		{
			name: "readout warning repeated",
			readout: func() experiment.Readout {
				r := twoArmReadout()
				open := experiment.Warning{Code: experiment.WarnOpenWindowCounts}
				r.Warnings = []experiment.Warning{open, open, open}
				return r
			},
			want: []string{"> 1. `purchase`", "> 2. the analysis window has no end: the counts say which units were immature only if the table has an immature column\n"},
			// and no third item: the block ends after the second
		},
		{
			name:    "failing guardrail",
			readout: guardrailReadout,
			want: []string{
				"> 1. **Guardrail not met**: `unsubscribe`, `email-reminder` vs `control` is not shown to be within the margin: a rise of 0.50 pp or more is not ruled out (non-inferiority p = 0.9471 > 0.05; the 90% interval reaches +0.95 pp).\n",
			},
		},
		{
			// The verdict comes from non_inferior, not from the numbers.
			name: "guardrail passed",
			readout: func() experiment.Readout {
				r := guardrailReadout()
				r.Metrics[2].Comparisons[0].NonInferiority.NonInferior = true
				return r
			},
			absent: true,
		},
		{
			name: "guardrail not tested",
			readout: func() experiment.Readout {
				r := guardrailReadout()
				r.Metrics[2].Comparisons[0].NonInferiority.NonInferior = true
				r.Metrics[1].Comparisons[1].NonInferiority.Z = nil
				return r
			},
			want: []string{"> 1. **Guardrail not tested**: `repeat_visit`, `push-reminder` vs `control` could not be tested against its margin.\n"},
		},
		{
			name: "routes disagree",
			readout: func() experiment.Readout {
				r := twoArmReadout()
				r.Metrics[1].Comparisons[0].Z.RejectByPValue = true
				return r
			},
			want: []string{"`signup`, `green-button` vs `control`: the statistic and the p-value routes of the z test disagree"},
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			var buf bytes.Buffer
			if err := WriteMarkdown(&buf, []experiment.Readout{tc.readout()}, MarkdownOptions{}); err != nil {
				t.Fatal(err)
			}
			out := buf.String()
			_, block, found := strings.Cut(out, "> **Warnings**\n>\n")
			if tc.absent {
				if found {
					t.Errorf("unexpected warning block:\n%s", out)
				}
				return
			}
			if !found {
				t.Fatalf("no warning block:\n%s", out)
			}
			block, _, _ = strings.Cut(block, "\n## ")
			rest := block
			for _, w := range tc.want {
				i := strings.Index(rest, w)
				if i < 0 {
					t.Fatalf("block lacks %q (or has it out of order):\n%s", w, block)
				}
				rest = rest[i+len(w):]
			}
			if strings.HasPrefix(rest, ">") {
				t.Errorf("block has more items than expected:\n%s", block)
			}
		})
	}
}

func TestNotes(t *testing.T) {
	n := newNotes()
	steps := []struct {
		add  []string
		want string
	}{
		{nil, "none"},
		{[]string{"a"}, "[1]"},
		{[]string{"b", "a", "b"}, "[2], [1]"},
		{[]string{"", "c"}, "[3]"},
		{[]string{"a\nlong   one"}, "[4]"},
		{[]string{"a long one"}, "[4]"},
	}
	for _, s := range steps {
		if got := n.add(s.add...); got != s.want {
			t.Errorf("add(%q) = %q, want %q", s.add, got, s.want)
		}
	}
	var md markdown
	n.flush(&md)
	n.add("d", "a")
	n.flush(&md)
	n.flush(&md)
	want := "1. a\n2. b\n3. c\n4. a long one\n\n5. d\n\n"
	if got := md.buf.String(); got != want {
		t.Errorf("flushed %q, want %q", got, want)
	}
}

func TestTableEscapesPipes(t *testing.T) {
	r := twoArmReadout()
	r.Arms[1].Name = "green|button"
	var buf bytes.Buffer
	if err := WriteMarkdown(&buf, []experiment.Readout{r}, MarkdownOptions{}); err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(buf.String(), "| `green\\|button` | 9,988 |") {
		t.Errorf("pipe in an arm name not escaped:\n%s", buf.String())
	}
}

func TestOmitCautions(t *testing.T) {
	for _, omit := range []bool{false, true} {
		var buf bytes.Buffer
		if err := WriteMarkdown(&buf, []experiment.Readout{twoArmReadout()}, MarkdownOptions{OmitCautions: omit}); err != nil {
			t.Fatal(err)
		}
		has := strings.Contains(buf.String(), "## Before acting\n")
		if has == omit {
			t.Errorf("OmitCautions %v: cautions present %v", omit, has)
		}
	}
}

// render1 writes one readout as Markdown with the default options.
func render1(t *testing.T, r experiment.Readout) string {
	t.Helper()
	var buf bytes.Buffer
	if err := WriteMarkdown(&buf, []experiment.Readout{r}, MarkdownOptions{}); err != nil {
		t.Fatal(err)
	}
	return buf.String()
}

// tableRowOf returns the first table row of out whose label is label.
func tableRowOf(t *testing.T, out, label string) string {
	t.Helper()
	for _, l := range strings.Split(out, "\n") {
		if strings.HasPrefix(l, "| "+label+" |") {
			return l
		}
	}
	t.Fatalf("no row %q in:\n%s", label, out)
	return ""
}

// TestDecisionRowShowsAdjustment checks that the Decision row follows the
// adjusted decision and names the unadjusted one when they differ, and
// that a failed sample ratio check leaves no decision standing.
func TestDecisionRowShowsAdjustment(t *testing.T) {
	tests := []struct {
		name    string
		readout func() experiment.Readout
		want    string
	}{
		{"both significant", twoArmReadout,
			"| Decision | **better**: significant after Holm adjustment, as before it |"},
		{"significant before, not after", func() experiment.Readout {
			r := threeArmReadout()
			r.SampleRatio.Mismatch = false
			return r
		}, "| Decision | **no detectable difference**: not significant after Holm adjustment; significant before it | **no detectable difference**: not significant after Holm adjustment, as before it |"},
		{"sample ratio mismatch", threeArmReadout,
			"| Decision | **not readable**: a check failed (sample ratio), so no decision is drawn from this test | **not readable**: a check failed (sample ratio), so no decision is drawn from this test |"},
		{"no adjustment", func() experiment.Readout {
			r := twoArmReadout()
			r.Metrics[0].Comparisons[0].Adjusted.Method = "none"
			return r
		}, "| Decision | **better**: significant (no adjustment) |"},
		{"outside the family", func() experiment.Readout {
			r := twoArmReadout()
			r.Metrics[0].Comparisons[0].Adjusted = nil
			return r
		}, "| Decision | **better**: significant (outside the family) |"},
		{"decided by the exact test", func() experiment.Readout {
			r := twoArmReadout()
			c := &r.Metrics[0].Comparisons[0]
			c.DecidedBy = experiment.DecidedByExact
			c.Exact = &experiment.ExactTest{Method: "Fisher's exact test", PValue: 0.01, Alpha: 0.05, Alternative: "two-sided", Reject: true}
			return r
		}, "| Decision | **better**: significant after Holm adjustment, as before it; by Fisher's exact test |"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			out := render1(t, tc.readout())
			if got := tableRowOf(t, out, "Decision"); got != tc.want {
				t.Errorf("Decision row\n%s\nwant\n%s", got, tc.want)
			}
		})
	}
}

func TestSimultaneousRowOnlyWithBonferroni(t *testing.T) {
	out := render1(t, guardrailReadout())
	want := "| Simultaneous interval | 97.5% CI +0.48 to +1.72 pp (Newcombe hybrid score at 1 - 0.05 / 2): excludes 0 | 97.5% CI -0.03 to +1.18 pp (Newcombe hybrid score at 1 - 0.05 / 2): includes 0 |"
	if got := tableRowOf(t, out, "Simultaneous interval"); got != want {
		t.Errorf("row\n%s\nwant\n%s", got, want)
	}
	if strings.Contains(render1(t, threeArmReadout()), "Simultaneous interval") {
		t.Error("a Holm readout shows a simultaneous interval row")
	}
}

// TestCautionNamesAdjustment checks the "Before acting" item on multiple
// comparisons.
func TestCautionNamesAdjustment(t *testing.T) {
	tests := []struct {
		name    string
		readout func() experiment.Readout
		want    string
	}{
		{"holm with target tests", threeArmReadout,
			"- Multiple comparisons: the 4 comparisons with the control on `activated` and `plan_upgrade` were adjusted together by the Holm method, which keeps the family-wise error rate (the chance of even one false positive among them) at alpha 0.05; the decisions above are the adjusted ones (3 were significant only before adjustment). Outside the family, each at alpha 0.05 on its own: 6 target-rate tests; the more of them, the likelier one is significant by chance.\n"},
		{"guardrails outside", guardrailReadout,
			"Outside the family, each at alpha 0.05 on its own: 4 guardrail non-inferiority tests and 4 difference tests on guardrail metrics;"},
		{"no adjustment", func() experiment.Readout {
			r := threeArmReadout()
			r.Settings.Adjustment, r.Multiplicity.Method = "none", "none"
			for i := range r.Metrics {
				for j := range r.Metrics[i].Comparisons {
					r.Metrics[i].Comparisons[j].Adjusted = nil
				}
			}
			return r
		}, "- This readout makes 10 tests, each at alpha 0.05, with no adjustment for multiple comparisons; the more tests, the likelier one is significant by chance.\n"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			out := render1(t, tc.readout())
			_, cautions, _ := strings.Cut(out, "## Before acting\n")
			cautions, _, _ = strings.Cut(cautions, "## Diagnostics")
			if !strings.Contains(cautions, tc.want) {
				t.Errorf("cautions lack %q:\n%s", tc.want, cautions)
			}
		})
	}
}

// TestIntervalLevelExplained checks that the level of a one-sided
// readout's intervals is explained once, in the header, with the bound on
// the tested side.
func TestIntervalLevelExplained(t *testing.T) {
	const line = "- Interval level: "
	tests := []struct {
		alternative string
		want        string // "" for no line
	}{
		{"two-sided", ""},
		{"greater", "- Interval level: the tests are one-sided (treatment higher), so every interval of a rate, difference or lift is two-sided at 90% (1 - 2 × alpha): its lower bound is the one-sided 95% bound that matches the test.\n"},
		{"less", "- Interval level: the tests are one-sided (treatment lower), so every interval of a rate, difference or lift is two-sided at 90% (1 - 2 × alpha): its upper bound is the one-sided 95% bound that matches the test.\n"},
	}
	for _, tc := range tests {
		t.Run(tc.alternative, func(t *testing.T) {
			r := oneSidedReadout()
			r.Settings.Alternative = tc.alternative
			out := render1(t, r)
			if n := strings.Count(out, line); n != min(len(tc.want), 1) {
				t.Fatalf("%d interval level lines:\n%s", n, out)
			}
			if tc.want != "" && !strings.Contains(out, tc.want) {
				t.Errorf("no line %q in:\n%s", tc.want, out)
			}
		})
	}
}

// TestGuardrailTable checks the guardrail rows of a lower-is-better metric
// (alternative less) against numbers worked from the fixture: margin 0.005,
// upper bound 0.0095296 > 0.005; z = 1.617 > -1.645.
func TestGuardrailTable(t *testing.T) {
	out := render1(t, guardrailReadout())
	_, sec, _ := strings.Cut(out, "## Metric `unsubscribe` (guardrail, lower is better)\n")
	for _, want := range []string{
		"H0: difference ≥ +0.50 pp (worse by the margin or more); H1: difference < +0.50 pp.",
		"| Non-inferiority test, both routes | z = 1.62 > -1.64 and p = 0.9471 > 0.05: do not reject H0 | z = -3.29 ≤ -1.64 and p = 0.0005 ≤ 0.05: reject H0 |",
		"Test: the non-inferiority z test (Farrington-Manning score), one-sided (less).",
		"| Interval against the margin | 90% CI +0.50 to +0.95 pp: upper bound +0.95 ≥ +0.50, at or past the margin |",
		"| Verdict | **not shown to be within the margin** | **not worse than the margin** |",
		"significant at alpha 0.05: an increase, which is bad news for this metric (lower is better).",
	} {
		if !strings.Contains(sec, want) {
			t.Errorf("unsubscribe section lacks %q:\n%s", want, sec)
		}
	}
	_, sec, _ = strings.Cut(out, "## Metric `repeat_visit` (guardrail, higher is better)\n")
	for _, want := range []string{
		// 0.03 * 40.00% = 1.20 pp
		"rule out a drop of 1.20 pp or more against `control` (margin 3% of the `control` rate 40.00%, that is 1.20 pp; higher is better",
		"Margin: 1.20 pp (3% of the `control` rate).",
		"lower bound -0.94 > -1.20, inside the margin",
	} {
		if !strings.Contains(sec, want) {
			t.Errorf("repeat_visit section lacks %q:\n%s", want, sec)
		}
	}
}

// TestGuardrailIntervalDisagrees marks a guardrail whose interval and test
// disagree.
func TestGuardrailIntervalDisagrees(t *testing.T) {
	r := guardrailReadout()
	// The interval says within (upper bound +0.29 < +0.50); make the test
	// say otherwise.
	ni := r.Metrics[2].Comparisons[1].NonInferiority
	ni.NonInferior = false
	out := render1(t, r)
	if !strings.Contains(out, "upper bound +0.29 < +0.50, inside the margin; disagrees with the test, a borderline result") {
		t.Errorf("no disagreement shown:\n%s", out)
	}
}

func TestDirectionNote(t *testing.T) {
	up, down := ptr(0.01), ptr(-0.01)
	tests := []struct {
		lower       bool
		significant bool
		diff        *float64
		want        string
	}{
		{false, true, up, ""},
		{false, true, down, "a decrease, which is bad news for this metric (higher is better)"},
		{true, true, up, "an increase, which is bad news for this metric (lower is better)"},
		{true, true, down, "a decrease, which is good news for this metric (lower is better)"},
		{true, false, up, ""},
		{true, true, nil, ""},
	}
	for _, tc := range tests {
		m := experiment.MetricReadout{LowerIsBetter: tc.lower}
		c := experiment.Comparison{Significant: tc.significant, Difference: tc.diff}
		if got := directionNote(m, c); got != tc.want {
			t.Errorf("lower %v, significant %v, diff %v: %q, want %q", tc.lower, tc.significant, tc.diff, got, tc.want)
		}
	}
}

// TestSentenceLines checks where long paragraphs are split: after a
// sentence that a capital, a code span or bold text follows, never inside
// numbers or before lower-case words, and not at all when short. Markdown
// joins the lines again (CommonMark 0.31, 4.8 Paragraphs: the lines of a
// paragraph are joined with soft line breaks).
func TestSentenceLines(t *testing.T) {
	long := strings.Repeat("x", longParagraph)
	cases := []struct {
		name string
		in   string
		want []string
	}{
		{"short", "One. Two.", []string{"One. Two."}},
		{"capital", long + ". Next one.", []string{long + ".", "Next one."}},
		{"code span", long + ". `arm` next.", []string{long + ".", "`arm` next."}},
		{"bold", long + ". **Bold** next.", []string{long + ".", "**Bold** next."}},
		{"single star stays", long + ". * not a list.", []string{long + ". * not a list."}},
		{"number stays", long + " p = 0.05. then lower.", []string{long + " p = 0.05. then lower."}},
		{"decimal stays", long + " 1.5 pp", []string{long + " 1.5 pp"}},
	}
	for _, c := range cases {
		got := sentenceLines(c.in)
		if !slices.Equal(got, c.want) {
			t.Errorf("%s: got %q, want %q", c.name, got, c.want)
		}
		if strings.Join(got, " ") != c.in {
			t.Errorf("%s: the lines do not join back to the paragraph", c.name)
		}
	}
}
