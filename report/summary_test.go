package report

import (
	"bytes"
	"regexp"
	"slices"
	"strings"
	"testing"

	"github.com/armtally/armtally/experiment"
)

// outcomeVocabulary is the summary's fixed vocabulary of outcomes.
var outcomeVocabulary = []string{"better", "worse", "no detectable difference", "guardrail held",
	"guardrail not shown", "not readable: a check failed", "not enough data"}

// summaryOf reads the summary of the first readout in md from its first
// 20 lines: the overall line, the table rows split into cells, and the
// cautions line. It fails the test when one of them is not there.
func summaryOf(t *testing.T, md string) (overall string, rows [][]string, cautions string) {
	t.Helper()
	lines := strings.Split(md, "\n")
	if len(lines) > 20 {
		lines = lines[:20]
	}
	inTable := false
	for _, l := range lines {
		switch {
		case regexp.MustCompile(`^\*\*(Ship|Stop|Wait|Fix the data)`).MatchString(l):
			overall = l
		case strings.HasPrefix(l, "| Metric | Role | Treatment |"):
			inTable = true
		case inTable && strings.HasPrefix(l, "|:"):
		case inTable && strings.HasPrefix(l, "| "):
			cells := strings.Split(strings.Trim(l, "| "), " | ")
			rows = append(rows, cells)
		case strings.HasPrefix(l, "**Cautions:**"):
			cautions = l
			inTable = false
		default:
			inTable = false
		}
	}
	if overall == "" || cautions == "" {
		t.Fatalf("no overall line or cautions in the first 20 lines:\n%s", strings.Join(lines, "\n"))
	}
	return overall, rows, cautions
}

// TestSummaryFirstLines checks, from the text of every golden readout,
// that the summary is in the first 20 lines: an overall line that
// starts with the decision, one table row per treatment and metric with
// primary metrics first, then secondary, then guardrails, each outcome
// in the fixed vocabulary, and the cautions.
func TestSummaryFirstLines(t *testing.T) {
	for _, tc := range goldenCases() {
		t.Run(tc.name, func(t *testing.T) {
			var buf bytes.Buffer
			if err := WriteMarkdown(&buf, tc.readouts, tc.opts); err != nil {
				t.Fatal(err)
			}
			r := tc.readouts[0]
			_, rows, cautions := summaryOf(t, buf.String())
			want := 0
			for _, m := range r.Metrics {
				want += len(m.Comparisons)
			}
			if len(rows) != want {
				t.Fatalf("%d summary rows, want %d (one per treatment and metric)", len(rows), want)
			}
			rank := map[string]int{"primary": 0, "secondary": 1, "guardrail": 2}
			last := 0
			for _, row := range rows {
				role, _, _ := strings.Cut(row[1], ",")
				k, ok := rank[role]
				if !ok || k < last {
					t.Errorf("row %q: role %q out of order", row, role)
				}
				last = k
				if !slices.Contains(outcomeVocabulary, row[6]) {
					t.Errorf("row %q: outcome %q not in the vocabulary", row, row[6])
				}
			}
			if !strings.Contains(cautions, "not necessarily one large enough to matter") || !strings.Contains(cautions, "fixed in advance") {
				t.Errorf("cautions line lacks the standing cautions: %s", cautions)
			}
		})
	}
}

// TestSummaryOverallLine checks the overall line of fixtures whose
// decision follows from their numbers by the rules of the design
// (experiment.NewVerdict's doc): a treatment better on a primary metric
// with no guardrail ships; one worse on a guardrail stops whatever its
// primary metric says; a failed sample ratio check makes nothing
// readable; nothing significant, or an arm without units, is wait.
func TestSummaryOverallLine(t *testing.T) {
	tests := []struct {
		name    string
		readout experiment.Readout
		want    []string
	}{
		{"ship", twoArmReadout(), []string{"**Ship `green-button`.**", "is better on the primary metric `purchase`", "The sample ratio check passed"}},
		{"stop on a guardrail", guardrailReadout(), []string{"**Stop `email-reminder`.**", "is better on the primary metric `reorder`, but is worse on the guardrail `unsubscribe`", "`push-reminder` (wait)"}},
		{"fix the data", threeArmReadout(), []string{"**Fix the data first: no comparison is readable.**", "The sample ratio check failed (p = 0.0007 < 0.001)"}},
		{"wait", func() experiment.Readout {
			r := twoArmReadout()
			r.Metrics[0].Comparisons[0].Significant = false
			return r
		}(), []string{"**Wait: nothing to ship or stop yet.**", "`green-button` shows no detectable difference on the primary metrics `purchase` and `signup`."}},
		{"not enough data", emptyReadout(), []string{"**Wait: nothing to ship or stop yet.**", "has not enough data on the primary metric `trial_started`", "Sample ratio not checked"}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			overall, _, _ := summaryOf(t, render1(t, tc.readout))
			for _, w := range tc.want {
				if !strings.Contains(overall, w) {
					t.Errorf("overall line lacks %q:\n%s", w, overall)
				}
			}
		})
	}
}

// TestSampleRatioMismatchLeavesNoDecision checks that with a failed
// sample ratio check no summary row or Decision or Verdict cell of the
// readout reads as a decision: every summary outcome is "not readable",
// and no detail cell says "significant".
func TestSampleRatioMismatchLeavesNoDecision(t *testing.T) {
	for _, r := range []experiment.Readout{threeArmReadout(), func() experiment.Readout {
		r := guardrailReadout()
		r.SampleRatio.Mismatch = true
		r.Verdict = experiment.NewVerdict(r)
		return r
	}()} {
		md := render1(t, r)
		_, rows, _ := summaryOf(t, md)
		for _, row := range rows {
			if row[6] != "not readable: a check failed" {
				t.Errorf("summary row %q under a mismatch", row)
			}
		}
		for _, label := range []string{"Decision", "Verdict"} {
			for _, l := range cellsOf(md, label) {
				if strings.Contains(l, "significant") || strings.Contains(l, "not worse than") || !strings.Contains(l, "not readable") {
					t.Errorf("%s row under a mismatch: %s", label, l)
				}
			}
		}
	}
}

// TestBrief checks the compact form: title, summary, warnings and
// cautions, and none of the detail.
func TestBrief(t *testing.T) {
	var buf bytes.Buffer
	if err := WriteMarkdown(&buf, []experiment.Readout{guardrailReadout()}, MarkdownOptions{Brief: true}); err != nil {
		t.Fatal(err)
	}
	md := buf.String()
	summaryOf(t, md)
	for _, want := range []string{"# Experiment `reorder-reminder`\n", "> **Warnings**\n", "## Before acting\n", "diagnostics of the full readout"} {
		if !strings.Contains(md, want) {
			t.Errorf("brief lacks %q:\n%s", want, md)
		}
	}
	for _, not := range []string{"## Setup", "## Arms", "## Multiple comparisons", "## Metric ", "### Against control", "## Diagnostics"} {
		if strings.Contains(md, not) {
			t.Errorf("brief has %q:\n%s", not, md)
		}
	}
	full := render1(t, guardrailReadout())
	if len(md) >= len(full)/3 {
		t.Errorf("brief is %d bytes, the full readout %d", len(md), len(full))
	}
}

// TestTitleWithoutKey checks the title of a readout whose rows carry no
// experiment key.
func TestTitleWithoutKey(t *testing.T) {
	r := twoArmReadout()
	r.Experiment = ""
	first, _, _ := strings.Cut(render1(t, r), "\n")
	if first != "# Experiment readout: `control` and `green-button` (no experiment key)" {
		t.Errorf("title %q", first)
	}
	r.Arms = nil
	first, _, _ = strings.Cut(render1(t, r), "\n")
	if first != "# Experiment readout (no experiment key)" {
		t.Errorf("title without arms %q", first)
	}
}
