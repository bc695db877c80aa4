package experiment

import (
	"errors"
	"fmt"
	"testing"
)

// segSpec is spec2 with one segment dimension "plan" and a limit of three
// values.
func segSpec() Spec {
	s := spec2()
	s.Segments = []string{"plan"}
	s.MaxSegmentValues = 3
	return s
}

// manyPlans exposes n units, unit i with plan value "p<i>".
func manyPlans(n int) []row {
	var rows []row
	for i := range n {
		r := seen(fmt.Sprintf("u%d", i), hour, []string{"control", "treat"}[i%2])
		r.segs = []string{fmt.Sprintf("p%d", i)}
		rows = append(rows, r)
	}
	return rows
}

// TestSegmentLimit checks the limit of distinct values per segment
// dimension: a tally stops at the batch where one partition sees more
// (so that a column such as the unit key fails at once instead of after
// minutes and gigabytes), and the analysis refuses more over all
// partitions and arms; up to the limit, and with null as one value, the
// breakdown is made. The limit is armtally's documented rule.
func TestSegmentLimit(t *testing.T) {
	var le *SegmentLimitError
	// One partition: the fourth value stops Add.
	tl, err := newTallier(segSpec(), 1)
	if err != nil {
		t.Fatal(err)
	}
	rec := batch(t, manyPlans(4), "plan")
	defer rec.Release()
	err = tl.Add(rec)
	if !errors.As(err, &le) || le.Dimension != "plan" || le.Limit != 3 {
		t.Fatalf("Add: %v, want a SegmentLimitError for plan, 3", err)
	}
	want := `segment "plan" has more than 3 distinct values, the limit for a segment breakdown (--max-segment-values): segment by a column with fewer values, or raise the limit`
	if err.Error() != want {
		t.Errorf("message\n got  %s\n want %s", err, want)
	}

	// Four values over the arms, at most three per arm: the analysis
	// refuses them.
	spec := segSpec()
	counts := func(v string) SegmentCell {
		return SegmentCell{Value: SegmentValue{Value: v, Valid: true}, Metrics: []Count{{Units: 1}}}
	}
	tally := Tally{Arms: []ArmTally{
		{Name: "control", Units: 3, Metrics: []Count{{Units: 3}}, Segments: []SegmentCounts{{Dimension: "plan", Values: []SegmentCell{counts("a"), counts("b"), counts("c")}}}},
		{Name: "treat", Units: 1, Metrics: []Count{{Units: 1}}, Segments: []SegmentCounts{{Dimension: "plan", Values: []SegmentCell{counts("d")}}}},
	}}
	if _, err := Analyze(spec, tally, DefaultAnalysisOptions()); !errors.As(err, &le) {
		t.Errorf("Analyze with 4 values over the arms: %v, want a SegmentLimitError", err)
	}
	// Three values and a null: null counts as a value.
	tally.Arms[1].Segments[0].Values[0] = SegmentCell{Metrics: []Count{{Units: 1}}}
	if _, err := Analyze(spec, tally, DefaultAnalysisOptions()); !errors.As(err, &le) {
		t.Errorf("Analyze with 3 values and null: %v, want a SegmentLimitError", err)
	}
	// Three values: analysed.
	tally.Arms[1].Segments[0].Values[0] = counts("a")
	if _, err := Analyze(spec, tally, DefaultAnalysisOptions()); err != nil {
		t.Errorf("Analyze with 3 values: %v", err)
	}

	// A unit table stops the same way.
	ut, err := NewUnitTableTallier(segSpec())
	if err != nil {
		t.Fatal(err)
	}
	var urs []unitRow
	for i := range 5 {
		urs = append(urs, ur(fmt.Sprintf("u%d", i), "control", hour, false).seg(fmt.Sprintf("p%d", i)))
	}
	ub := unitBatch(t, segSpec(), urs, true)
	defer ub.Release()
	if err := ut.Add(ub); !errors.As(err, &le) {
		t.Errorf("unit table Add: %v, want a SegmentLimitError", err)
	}

	// The default limit applies when the spec gives none.
	if got := (Spec{}).maxSegmentValues(); got != DefaultMaxSegmentValues || DefaultMaxSegmentValues != 100 {
		t.Errorf("default limit %d, want 100", got)
	}
}
