package experiment

import "time"

// Readout is the analysed result for one experiment: everything package
// report renders as Markdown and JSON. Values that are undefined for the
// given counts (a rate of an arm with no units, a lift over a zero control
// rate) are nil pointers, never NaN or Inf. Slices are in readout order: arms
// in spec order then first seen, metrics in spec order.
type Readout struct {
	Experiment    string      `json:"experiment"`
	ExposureEvent string      `json:"exposure_event"`
	Control       string      `json:"control"`
	WindowStart   *time.Time  `json:"window_start"`
	WindowEnd     *time.Time  `json:"window_end"`
	Freshness     *time.Time  `json:"data_freshness"`
	Settings      Settings    `json:"settings"`
	Arms          []ArmUnits  `json:"arms"`
	SampleRatio   SampleRatio `json:"sample_ratio"`
	// Multiplicity says how the comparisons were adjusted for being many.
	Multiplicity Multiplicity `json:"multiple_comparisons"`
	// Segmentation says which segment dimensions the metrics are broken
	// down by, and how far to trust those breakdowns.
	Segmentation Segmentation    `json:"segmentation"`
	Metrics      []MetricReadout `json:"metrics"`
	Diagnostics  Diagnostics     `json:"diagnostics"`
	// Warnings are readout-wide cautions (sample ratio, exclusions,
	// conditions), deduplicated, in first-seen order.
	Warnings []string `json:"warnings"`
}

// Settings echoes the analysis settings that shaped the numbers.
type Settings struct {
	Alpha float64 `json:"alpha"`
	// ConfidenceLevel is the level of every two-sided interval: 1 - alpha
	// for a two-sided alternative, 1 - 2 alpha for a one-sided one (so that
	// the bound on the tested side is the one-sided 1 - alpha bound).
	ConfidenceLevel      float64 `json:"confidence_level"`
	Alternative          string  `json:"alternative"`
	MultiArmPolicy       string  `json:"multi_arm_policy"`
	MaturityPolicy       string  `json:"maturity_policy"`
	MinCount             int64   `json:"min_count"`
	SampleRatioThreshold float64 `json:"sample_ratio_threshold"`
	// IntervalMethod, DifferenceIntervalMethod and LiftIntervalMethod name
	// the interval methods of the rates, the differences and the lifts.
	IntervalMethod           string `json:"interval_method"`
	DifferenceIntervalMethod string `json:"difference_interval_method"`
	LiftIntervalMethod       string `json:"lift_interval_method"`
	// Adjustment is the multiple-comparison adjustment: none, bonferroni,
	// holm, hochberg, bh or by.
	Adjustment string `json:"adjustment"`
	// NonInferiorityMethod names the variance of guardrail tests.
	NonInferiorityMethod string `json:"non_inferiority_method"`
}

// Multiplicity describes the family of comparisons adjusted together.
type Multiplicity struct {
	// Method is the adjustment (as Settings.Adjustment).
	Method string `json:"method"`
	// ErrorRate is what the method controls at alpha: "family-wise error
	// rate", "false discovery rate" or "per comparison" (none).
	ErrorRate string `json:"error_rate"`
	// Family says which comparisons form the family.
	Family string `json:"family"`
	// Size is the number of comparisons in the family.
	Size int `json:"family_size"`
}

// ArmUnits is one arm of the analysis population (after multi-arm and tie
// exclusions, before per-metric maturity exclusions).
type ArmUnits struct {
	Name          string  `json:"name"`
	Units         int64   `json:"units"`
	PlannedShare  float64 `json:"planned_share"`
	ObservedShare float64 `json:"observed_share"`
}

// SampleRatio is the Pearson chi-square goodness-of-fit check of units per
// arm against the planned split.
type SampleRatio struct {
	Method    string  `json:"method"`
	Statistic float64 `json:"statistic"`
	DF        int     `json:"df"`
	PValue    float64 `json:"p_value"`
	Threshold float64 `json:"threshold"`
	// Mismatch is true when PValue < Threshold.
	Mismatch bool `json:"mismatch"`
	// Checked is false when fewer than two arms have units.
	Checked bool `json:"checked"`
}

// MetricReadout holds one metric's per-arm rates and comparisons.
type MetricReadout struct {
	Name   string   `json:"name"`
	Events []string `json:"events"`
	// WindowSeconds is the attribution window in seconds; nil is unlimited.
	WindowSeconds *int64   `json:"window_seconds"`
	Target        *float64 `json:"target_rate"`
	// LowerIsBetter marks a metric where a lower rate is the good outcome
	// (unsubscribes, refunds); it sets the direction of guardrail tests
	// and of the readout's wording.
	LowerIsBetter bool `json:"lower_is_better"`
	// Guardrail is set for a guardrail metric: each treatment is tested
	// for non-inferiority against the control with this margin. Guardrail
	// comparisons are outside the multiple-comparison family.
	Guardrail   *Guardrail   `json:"guardrail"`
	Arms        []ArmRate    `json:"arms"`
	Comparisons []Comparison `json:"comparisons"`
	// Segments breaks the metric down by segment: one entry per dimension
	// of Segmentation.Dimensions and value, dimensions in that order and
	// values sorted (null last). Exploratory: see Segmentation.
	Segments []SegmentResult `json:"segments"`
	Warnings []string        `json:"warnings"`
}

// Segmentation describes the segment breakdowns of a readout. Segment
// results are exploratory: their comparisons are outside the
// multiple-comparison family, each decided at alpha on its own, so the
// more segments, the more of them look significant by chance.
type Segmentation struct {
	// Dimensions are the segment dimensions, in spec order; empty when the
	// readout has no segment breakdown.
	Dimensions []string `json:"dimensions"`
	// Tests is the number of segment comparisons with a test.
	Tests int `json:"tests"`
	// Caution says what the segment results can and cannot show; "" when
	// there are none.
	Caution string `json:"caution"`
}

// SegmentResult is one metric for the units with one value of one segment
// dimension: per-arm rates and each treatment against the control, decided
// at alpha without adjustment (Adjusted is nil and Significant equals
// SignificantUnadjusted) and without guardrail or target tests.
type SegmentResult struct {
	Dimension string `json:"dimension"`
	// Value is the segment value; nil for the null value.
	Value *string `json:"value"`
	// Exploratory is always true: a segment result is a lead, not a
	// finding.
	Exploratory bool         `json:"exploratory"`
	Arms        []ArmRate    `json:"arms"`
	Comparisons []Comparison `json:"comparisons"`
}

// Guardrail is the non-inferiority margin of a guardrail metric.
type Guardrail struct {
	// Margin is the margin as given: a difference of rates (0.005 is half a
	// percentage point) or, when Relative, a share of the control's rate.
	Margin   float64 `json:"margin"`
	Relative bool    `json:"relative"`
}

// ArmRate is one arm's conversion rate for one metric.
type ArmRate struct {
	Arm         string `json:"arm"`
	Units       int64  `json:"units"`
	Conversions int64  `json:"conversions"`
	// Immature counts units whose attribution window had not closed: left
	// out of Units under the exclude policy, counted in Units under include.
	Immature int64     `json:"immature_units"`
	Rate     *float64  `json:"rate"`
	Interval *Interval `json:"interval"`
	// TargetTest is set when the metric has a target rate.
	TargetTest *TargetTest `json:"target_test,omitempty"`
}

// Interval is a two-sided confidence interval.
type Interval struct {
	Lower  float64 `json:"lower"`
	Upper  float64 `json:"upper"`
	Level  float64 `json:"level"`
	Method string  `json:"method"`
}

// Test is a z test decided by both routes: the statistic against the
// critical value, and the p-value against alpha.
type Test struct {
	Method            string  `json:"method"`
	Statistic         float64 `json:"statistic"`
	CriticalValue     float64 `json:"critical_value"`
	PValue            float64 `json:"p_value"`
	Alpha             float64 `json:"alpha"`
	Alternative       string  `json:"alternative"`
	RejectByStatistic bool    `json:"reject_by_statistic"`
	RejectByPValue    bool    `json:"reject_by_p_value"`
}

// ExactTest is an exact test (Fisher's exact test for two arms, the exact
// binomial test against a target).
type ExactTest struct {
	Method      string  `json:"method"`
	PValue      float64 `json:"p_value"`
	Alpha       float64 `json:"alpha"`
	Alternative string  `json:"alternative"`
	Reject      bool    `json:"reject"`
}

// TargetTest is one arm tested against a fixed target rate p0.
type TargetTest struct {
	Target float64 `json:"target_rate"`
	Z      *Test   `json:"z_test"`
	// ConditionMet is n p0 >= MinCount and n (1 - p0) >= MinCount.
	ConditionMet bool       `json:"condition_met"`
	Exact        *ExactTest `json:"exact_test"`
	// Significant is the decision of the test relied on: the z test when
	// the condition holds, the exact test otherwise.
	Significant bool     `json:"significant"`
	DecidedBy   string   `json:"decided_by"`
	Warnings    []string `json:"warnings"`
}

// Comparison is one treatment arm against the control for one metric.
type Comparison struct {
	Treatment string `json:"treatment"`
	Control   string `json:"control"`
	// Difference is p_treatment - p_control.
	Difference         *float64  `json:"difference"`
	DifferenceInterval *Interval `json:"difference_interval"`
	// RelativeLift is p_treatment / p_control - 1.
	RelativeLift *float64  `json:"relative_lift"`
	LiftInterval *Interval `json:"relative_lift_interval"`
	Z            *Test     `json:"z_test"`
	// ConditionMet is at least MinCount conversions and MinCount
	// non-conversions in both arms.
	ConditionMet bool       `json:"condition_met"`
	Exact        *ExactTest `json:"exact_test"`
	// SignificantUnadjusted is the decision of the test relied on (the z
	// test, or the exact test when the condition fails) at alpha, before
	// any multiple-comparison adjustment.
	SignificantUnadjusted bool `json:"significant_unadjusted"`
	// Significant is the decision the readout reports: the adjusted one
	// when the comparison is in the family (Adjusted is set), otherwise
	// SignificantUnadjusted.
	Significant bool   `json:"significant"`
	DecidedBy   string `json:"decided_by"`
	// Adjusted is the multiple-comparison adjustment of this comparison;
	// nil when it is outside the family (a guardrail, or no test run).
	Adjusted *Adjusted `json:"adjusted"`
	// IntervalAgrees is false when the (unadjusted) difference interval's
	// exclusion of zero disagrees with the unadjusted decision.
	IntervalAgrees bool `json:"interval_agrees"`
	// NonInferiority is the guardrail test; nil for other metrics.
	NonInferiority *NonInferiorityTest `json:"non_inferiority"`
	Warnings       []string            `json:"warnings"`
}

// Adjusted is one comparison's multiple-comparison adjustment.
type Adjusted struct {
	Method     string  `json:"method"`
	FamilySize int     `json:"family_size"`
	PValue     float64 `json:"p_value"`
	// Significant is PValue <= alpha.
	Significant bool `json:"significant"`
	// DifferenceInterval is the simultaneous (Bonferroni) interval of the
	// difference at level 1 - (1 - level)/m: 1 - alpha/m for a two-sided
	// alternative, 1 - 2 alpha/m for a one-sided one. Set for the
	// Bonferroni method only.
	DifferenceInterval *Interval `json:"difference_interval"`
}

// NonInferiorityTest is a guardrail's non-inferiority z test:
// H0: the treatment is worse than the control by the margin or more.
type NonInferiorityTest struct {
	// AbsoluteMargin is the margin as a difference of rates; for a
	// relative margin, the margin times the control's observed rate.
	AbsoluteMargin float64 `json:"absolute_margin"`
	// Z is the one-sided z test of H1: d > -margin, z = (d + margin)/se,
	// alternative "greater"; for a lower-is-better metric H1: d < margin,
	// z = (d - margin)/se, alternative "less" (d = p_t - p_c).
	Z *Test `json:"z_test"`
	// NonInferior is true when H0 is rejected at alpha: the treatment is
	// shown not worse than the margin.
	NonInferior bool `json:"non_inferior"`
	// Interval is the difference interval whose bound on the harmful side
	// is compared with the margin: two-sided at 1 - 2 alpha.
	Interval *Interval `json:"interval"`
	Warnings []string  `json:"warnings"`
}

// Diagnostics accounts for every row read and every unit seen.
type Diagnostics struct {
	// Input is the input shape: event_log, unit_table or counts. A unit
	// table has no events, so its ignored events can only be exposures
	// outside the window; counts have neither events nor units, so
	// exposure rows, multi-arm and tied units are 0 and units exposed is
	// the sum of the arms' units.
	Input    string        `json:"input"`
	RowsRead int64         `json:"rows_read"`
	BadRows  []ReasonCount `json:"bad_rows"`
	// ExposureRows counts this experiment's exposure rows, inside the
	// analysis window or not.
	ExposureRows int64 `json:"exposure_rows"`
	// UnitsExposed counts units with at least one in-window exposure.
	UnitsExposed  int64 `json:"units_exposed"`
	MultiArmUnits int64 `json:"multi_arm_units"`
	// TiedUnits counts units whose earliest exposure rows carry two arms
	// at the same instant (policy first only).
	TiedUnits     int64         `json:"tied_units"`
	UnitsPerArm   []ArmCount    `json:"units_per_arm"`
	Immature      []MetricCount `json:"immature_units"`
	IgnoredEvents []ReasonCount `json:"ignored_events"`
}

// ReasonCount is a count by reason; reasons are snake_case words.
type ReasonCount struct {
	Reason string `json:"reason"`
	Count  int64  `json:"count"`
}

// ArmCount is a count of units by arm.
type ArmCount struct {
	Arm   string `json:"arm"`
	Units int64  `json:"units"`
}

// MetricCount is a count of units by metric.
type MetricCount struct {
	Metric string `json:"metric"`
	Units  int64  `json:"units"`
}
