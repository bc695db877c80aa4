package report

import (
	"bytes"
	"encoding/json"
	"slices"
	"strings"
	"testing"
	"time"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/stats"
)

// noticeCase is one analysis whose readout shows some warning kinds.
type noticeCase struct {
	name  string
	codes []string // the warning codes the readout must show
	spec  func(*experiment.Spec)
	tally experiment.Tally
	edit  func(*experiment.Readout) // for states an analysis cannot reach
}

// armTally is one arm with the given (conversions, units, immature) per
// metric.
func armTally(name string, units int64, counts ...[3]int64) experiment.ArmTally {
	a := experiment.ArmTally{Name: name, Units: units, Exposed: units}
	for _, c := range counts {
		a.Metrics = append(a.Metrics, experiment.Count{Conversions: c[0], Units: c[1], Immature: c[2]})
	}
	return a
}

// noticeCases reach every warning kind. The counts are those of
// experiment/REFERENCE-VALUES.md where a test must come out one way:
// SRM-02 (50600 vs 49400 units, p = 0.000148, R 4.2.2 chisq.test), P2-04
// (5/56 vs 0/29: few conversions, Fisher's exact test decides), NI-01
// (1180/10000 vs 1200/10000: within a 0.01 margin, p = 0.040; not within
// 0.001).
func noticeCases() []noticeCase {
	guard := func(margin float64, relative bool) func(*experiment.Spec) {
		return func(s *experiment.Spec) {
			s.Metrics = append(s.Metrics, experiment.Metric{Name: "refund", Events: []string{"refund"},
				Guardrail: &experiment.Margin{Value: margin, Relative: relative}})
		}
	}
	target := func(s *experiment.Spec) {
		p := 0.5
		s.Metrics[0].Target = &p
	}
	return []noticeCase{
		{name: "sample ratio mismatch, immature units left out",
			codes: []string{NoticeSampleRatioMismatch, NoticeImmatureExcluded},
			tally: experiment.Tally{Arms: []experiment.ArmTally{
				armTally("control", 49400, [3]int64{4940, 49400, 30}), armTally("treat", 50600, [3]int64{5060, 50600, 20})}}},
		{name: "an arm without units, a guardrail not tested, an open window",
			codes: []string{NoticeArmWithoutUnits, NoticeGuardrailNotTested, "open_window_event_log"},
			spec:  func(s *experiment.Spec) { s.End = nil; guard(0.01, false)(s) },
			tally: experiment.Tally{Arms: []experiment.ArmTally{
				armTally("control", 1000, [3]int64{100, 1000, 0}, [3]int64{10, 1000, 0}), armTally("treat", 0, [3]int64{}, [3]int64{})}}},
		{name: "only the control in the data",
			codes: []string{NoticeSampleRatioNotChecked},
			tally: experiment.Tally{Arms: []experiment.ArmTally{armTally("control", 1000, [3]int64{100, 1000, 0})}}},
		{name: "multi-arm and tied units, immature units included, few conversions",
			codes: []string{NoticeMultiArmUnits, NoticeTiedUnits, NoticeImmatureIncluded, NoticeApproximationUnjustified,
				"few_conversions"},
			spec: func(s *experiment.Spec) {
				s.Maturity = experiment.MaturityInclude
				s.MultiArm = experiment.MultiArmFirst
			},
			tally: experiment.Tally{Diag: experiment.TallyDiagnostics{MultiArmUnits: 3, TiedUnits: 2}, Arms: []experiment.ArmTally{
				armTally("control", 29, [3]int64{0, 29, 4}), armTally("treat", 56, [3]int64{5, 56, 1})}}},
		{name: "guardrail not met, with a relative margin over no conversions and a variance of 0",
			codes: []string{NoticeGuardrailNotMet, "relative_margin_zero", "z_no_conversions", "non_inferiority_undefined",
				"non_inferiority_no_fallback", "few_non_conversions"},
			spec: guard(0.05, true),
			tally: experiment.Tally{Arms: []experiment.ArmTally{
				armTally("control", 50, [3]int64{50, 50, 0}, [3]int64{0, 50, 0}), armTally("treat", 50, [3]int64{50, 50, 0}, [3]int64{0, 50, 0})}}},
		{name: "every unit converted; target tests with few expected counts",
			codes: []string{"z_all_converted", "few_expected_conversions"},
			spec:  func(s *experiment.Spec) { s.Metrics[0].Target = new(0.02) },
			tally: experiment.Tally{Arms: []experiment.ArmTally{
				armTally("control", 40, [3]int64{40, 40, 0}), armTally("treat", 40, [3]int64{40, 40, 0})}}},
		{name: "a target rate near 1",
			codes: []string{"few_expected_non_conversions"},
			spec:  func(s *experiment.Spec) { s.Metrics[0].Target = new(0.99) },
			tally: experiment.Tally{Arms: []experiment.ArmTally{
				armTally("control", 100, [3]int64{90, 100, 0}), armTally("treat", 100, [3]int64{95, 100, 0})}}},
		{name: "open windows of a unit table and of counts",
			codes: []string{"open_window_unit_table"},
			spec:  func(s *experiment.Spec) { s.End = nil },
			tally: experiment.Tally{Input: experiment.InputUnitTable, Arms: []experiment.ArmTally{
				armTally("control", 1000, [3]int64{100, 1000, 0}), armTally("treat", 1000, [3]int64{110, 1000, 0})}}},
		{name: "open window of counts",
			codes: []string{"open_window_counts"},
			spec:  func(s *experiment.Spec) { s.End = nil },
			tally: experiment.Tally{Input: experiment.InputCounts, Arms: []experiment.ArmTally{
				armTally("control", 1000, [3]int64{100, 1000, 0}), armTally("treat", 1000, [3]int64{110, 1000, 0})}}},
		// An incremental run that read every file again (set by the
		// pipeline, not by Analyze).
		{name: "a saved state recomputed",
			codes: []string{"state_recomputed"},
			tally: experiment.Tally{Arms: []experiment.ArmTally{
				armTally("control", 1000, [3]int64{100, 1000, 0}), armTally("treat", 1000, [3]int64{110, 1000, 0})}},
			edit: func(r *experiment.Readout) {
				r.Warnings = append(r.Warnings, experiment.Warning{Code: experiment.WarnStateRecomputed, Reason: "file dt=2026-05-19/part-0.csv changed since it was read"})
			}},
		// No analysis gives these (they would be bugs): made by hand.
		{name: "an interval and a test that disagree; routes that disagree",
			codes: []string{NoticeIntervalTestDisagree, NoticeRoutesDisagree},
			spec:  target,
			tally: experiment.Tally{Arms: []experiment.ArmTally{
				armTally("control", 1000, [3]int64{100, 1000, 0}), armTally("treat", 1000, [3]int64{110, 1000, 0})}},
			edit: func(r *experiment.Readout) {
				c := &r.Metrics[0].Comparisons[0]
				c.IntervalAgrees = false
				c.Z.RejectByStatistic = !c.Z.RejectByPValue
				r.Metrics[0].Arms[0].TargetTest.Z.RejectByStatistic = !r.Metrics[0].Arms[0].TargetTest.Z.RejectByPValue
			}},
	}
}

// jsonWarnings collects every warning of one JSON readout, wherever it
// sits.
func jsonWarnings(r JSONReadout) []JSONNotice {
	all := append([]JSONNotice(nil), r.Warnings...)
	comparisons := func(cs []JSONComparison) {
		for _, c := range cs {
			all = append(all, c.Warnings...)
			if c.NonInferiority != nil {
				all = append(all, c.NonInferiority.Warnings...)
			}
		}
	}
	arms := func(as []JSONArmRate) {
		for _, a := range as {
			if a.TargetTest != nil {
				all = append(all, a.TargetTest.Warnings...)
			}
		}
	}
	for _, m := range r.Metrics {
		all = append(all, m.Warnings...)
		comparisons(m.Comparisons)
		arms(m.Arms)
		for _, s := range m.Segments {
			comparisons(s.Comparisons)
			arms(s.Arms)
		}
	}
	return all
}

// Every warning kind appears in both outputs: each case's readout shows
// its kinds in the JSON, with a code, and every JSON warning's text is in
// the Markdown (which puts names in code spans and some words in bold);
// the readout-level JSON warnings are the Markdown's Warnings block, one
// for one; and the JSON follows the schema. The cases together reach
// every code.
func TestEveryWarningInBothOutputs(t *testing.T) {
	end := time.Date(2026, 5, 20, 0, 0, 0, 0, time.UTC)
	seen := map[string]bool{}
	sch := compileSchema(t)
	for _, tc := range noticeCases() {
		spec := experiment.Spec{Key: "gift-wrap", ExposureEvent: "seen", Control: "control", End: &end,
			Metrics: []experiment.Metric{{Name: "buy", Events: []string{"buy"}}}}
		if tc.spec != nil {
			tc.spec(&spec)
		}
		r, err := experiment.Analyze(spec, tc.tally, experiment.DefaultAnalysisOptions())
		if err != nil {
			t.Fatalf("%s: %v", tc.name, err)
		}
		if tc.edit != nil {
			tc.edit(&r)
		}
		var md, js bytes.Buffer
		if err := WriteMarkdown(&md, []experiment.Readout{r}, MarkdownOptions{}); err != nil {
			t.Fatal(err)
		}
		if err := WriteJSON(&js, []experiment.Readout{r}); err != nil {
			t.Fatal(err)
		}
		if err := sch.Validate(decode(t, js.Bytes())); err != nil {
			t.Errorf("%s: the JSON does not follow the schema: %v", tc.name, err)
		}
		var doc Document
		if err := json.Unmarshal(js.Bytes(), &doc); err != nil {
			t.Fatal(err)
		}
		plain := strings.NewReplacer("`", "", "**", "").Replace(md.String())
		var codes []string
		for _, w := range jsonWarnings(doc.Readouts[0]) {
			codes = append(codes, w.Code)
			seen[w.Code] = true
			if !strings.Contains(plain, w.Text) {
				t.Errorf("%s: JSON warning %s %q is not in the Markdown", tc.name, w.Code, w.Text)
			}
		}
		for _, want := range tc.codes {
			if !slices.Contains(codes, want) {
				t.Errorf("%s: no JSON warning %s (has %q)", tc.name, want, codes)
			}
		}
		block := 0
		for _, line := range strings.Split(md.String(), "\n") {
			if strings.HasPrefix(line, "> ") && len(line) > 3 && line[2] >= '1' && line[2] <= '9' {
				block++
			}
		}
		if block != len(doc.Readouts[0].Warnings) {
			t.Errorf("%s: %d warnings in the Markdown's block, %d in the JSON readout's", tc.name, block, len(doc.Readouts[0].Warnings))
		}
	}
	all := []string{NoticeSampleRatioMismatch, NoticeSampleRatioNotChecked, NoticeArmWithoutUnits, NoticeMultiArmUnits,
		NoticeTiedUnits, NoticeImmatureExcluded, NoticeImmatureIncluded, NoticeGuardrailNotTested, NoticeGuardrailNotMet,
		NoticeApproximationUnjustified, NoticeIntervalTestDisagree, NoticeRoutesDisagree}
	for c := experiment.WarningCode(1); c.Valid(); c++ {
		all = append(all, warningCode(c))
	}
	for _, code := range all {
		if !seen[code] {
			t.Errorf("no case shows warning %s", code)
		}
	}
}

// The JSON status rows carry the numbers of the comparison each points at,
// and a verdict whose rows point nowhere (set by hand) gives rows without
// numbers rather than a panic.
func TestJSONStatusRows(t *testing.T) {
	r := familiesReadout(t, stats.Holm)
	doc := NewDocument([]experiment.Readout{r})
	st := doc.Readouts[0].Status
	if len(st.Rows) != len(r.Verdict.Rows) || len(st.Rows) != 4 {
		t.Fatalf("%d status rows, verdict has %d, want 4", len(st.Rows), len(r.Verdict.Rows))
	}
	for i, row := range r.Verdict.Rows {
		c := r.Metrics[row.MetricIndex].Comparisons[row.ComparisonIndex]
		got := st.Rows[i]
		if got.Metric != row.Metric || got.Role != row.RoleName() || got.Outcome != row.Outcome.String() ||
			*got.Difference != *c.Difference || (got.AdjustedPValue == nil) != (c.Adjusted == nil) {
			t.Errorf("row %d: %+v for comparison %+v", i, got, c)
		}
	}
	if roles := []string{st.Rows[0].Role, st.Rows[1].Role, st.Rows[2].Role, st.Rows[3].Role}; !slices.Equal(roles,
		[]string{"primary", "secondary", "secondary", "guardrail"}) {
		t.Errorf("roles in summary order %q", roles)
	}
	r.Verdict.Rows[0].MetricIndex, r.Verdict.Rows[1].ComparisonIndex = 9, -1
	doc = NewDocument([]experiment.Readout{r})
	if rows := doc.Readouts[0].Status.Rows; rows[0].Difference != nil || rows[1].Difference != nil || rows[2].Difference == nil {
		t.Errorf("rows pointing nowhere: %+v", rows[:3])
	}
}
