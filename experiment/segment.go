package experiment

import (
	"fmt"
	"slices"

	"github.com/armtally/armtally/experiment/stats"
)

// DefaultMaxSegmentValues is the most distinct values a segment dimension
// may have when the spec does not say (Spec.MaxSegmentValues). A segment
// breakdown is for a few groups (platform, country); a column such as the
// unit key would give one table row per unit, and the readout would grow
// with the square of their number.
const DefaultMaxSegmentValues = 100

// SegmentLimitError is a segment dimension with more distinct values than
// the spec allows.
type SegmentLimitError struct {
	Dimension string
	Limit     int
}

func (e *SegmentLimitError) Error() string {
	return fmt.Sprintf("segment %q has more than %d distinct values, the limit for a segment breakdown (--max-segment-values): segment by a column with fewer values, or raise the limit", e.Dimension, e.Limit)
}

// maxSegmentValues returns the spec's limit of distinct values per
// segment dimension.
func (spec Spec) maxSegmentValues() int {
	if spec.MaxSegmentValues > 0 {
		return spec.MaxSegmentValues
	}
	return DefaultMaxSegmentValues
}

// checkSegments checks that every arm's segment counts follow the spec's
// dimensions, and that no dimension has more distinct values than the
// spec allows. An arm without segment counts (a control with no units,
// or a tally made before segments existed) reads as empty when the spec
// has no dimensions or the arm has no units.
func checkSegments(spec Spec, arms []ArmTally) error {
	for _, a := range arms {
		if len(a.Segments) == 0 {
			if len(spec.Segments) > 0 && a.Units > 0 {
				return fmt.Errorf("arm %q has no segment counts for the segment dimensions %q", a.Name, spec.Segments)
			}
			continue
		}
		if len(a.Segments) != len(spec.Segments) {
			return fmt.Errorf("arm %q has counts for %d segment dimensions, the spec names %d", a.Name, len(a.Segments), len(spec.Segments))
		}
		for d, sc := range a.Segments {
			if sc.Dimension != spec.Segments[d] {
				return fmt.Errorf("arm %q: segment dimension %d is %q, the spec's is %q", a.Name, d+1, sc.Dimension, spec.Segments[d])
			}
			for _, c := range sc.Values {
				if len(c.Metrics) != len(spec.Metrics) {
					return fmt.Errorf("arm %q: segment %s=%s has %d metrics, the spec %d", a.Name, sc.Dimension, c.Value, len(c.Metrics), len(spec.Metrics))
				}
			}
		}
	}
	for d, dim := range spec.Segments {
		if n := len(segmentValues(arms, d)); n > spec.maxSegmentValues() {
			return &SegmentLimitError{Dimension: dim, Limit: spec.maxSegmentValues()}
		}
	}
	return nil
}

// segmentValues returns the values of dimension d over the arms, sorted.
func segmentValues(arms []ArmTally, d int) []SegmentValue {
	var values []SegmentValue
	seen := make(map[SegmentValue]bool)
	for _, a := range arms {
		if d >= len(a.Segments) {
			continue
		}
		for _, c := range a.Segments[d].Values {
			if !seen[c.Value] {
				seen[c.Value] = true
				values = append(values, c.Value)
			}
		}
	}
	slices.SortFunc(values, CompareSegmentValues)
	return values
}

// segmentCount returns arm a's count of metric mi for value v of dimension
// d, zero when the arm has none.
func segmentCount(a ArmTally, d int, v SegmentValue, mi int) Count {
	if d >= len(a.Segments) {
		return Count{}
	}
	for _, c := range a.Segments[d].Values {
		if c.Value == v {
			return c.Metrics[mi]
		}
	}
	return Count{}
}

// analyzeSegments breaks metric mi down by every segment value: per-arm
// rates with intervals and each treatment against the control, with the
// same tests as the main comparison (the z test, Fisher's exact test where
// the normal approximation is not justified) but no adjustment, no target
// and no guardrail tests.
func analyzeSegments(spec Spec, mi int, arms []ArmTally, ctl int, so stats.Options, meth methods) ([]SegmentResult, error) {
	var out []SegmentResult
	for d, dim := range spec.Segments {
		for _, v := range segmentValues(arms, d) {
			sr := SegmentResult{Dimension: dim, Exploratory: true}
			if v.Valid {
				s := v.Value
				sr.Value = &s
			}
			counts := make([]Count, len(arms))
			for i, a := range arms {
				c := segmentCount(a, d, v, mi)
				counts[i] = c
				ar, err := meth.armRate(a.Name, c, so.Level)
				if err != nil {
					return nil, fmt.Errorf("segment %s=%s: %w", dim, v, err)
				}
				sr.Arms = append(sr.Arms, ar)
			}
			for i, a := range arms {
				if i == ctl {
					continue
				}
				c, err := compare(a.Name, counts[i], spec.Control, counts[ctl], so, meth)
				if err != nil {
					return nil, fmt.Errorf("segment %s=%s, %s vs %s: %w", dim, v, a.Name, spec.Control, err)
				}
				sr.Comparisons = append(sr.Comparisons, c)
			}
			out = append(out, sr)
		}
	}
	return out, nil
}

// segmentTests counts the segment comparisons with a test.
func segmentTests(metrics []MetricReadout) int {
	tests := 0
	for _, m := range metrics {
		for _, s := range m.Segments {
			for _, c := range s.Comparisons {
				if c.DecidedBy != "" {
					tests++
				}
			}
		}
	}
	return tests
}
