package experiment

import "time"

// Readout is the analysed result for one experiment: everything package
// report renders as Markdown and JSON. Values that are undefined for the
// given counts (a rate of an arm with no units, a lift over a zero control
// rate) are nil pointers, never NaN or Inf. Slices are in readout order: arms
// in ArmOrder (the control, the planned arms, the other arms by name) in
// every list, metrics in spec order.
type Readout struct {
	Experiment    string
	ExposureEvent string
	Control       string
	WindowStart   *time.Time
	WindowEnd     *time.Time
	Freshness     *time.Time
	Settings      Settings
	Arms          []ArmUnits
	SampleRatio   SampleRatio
	// Multiplicity says how the confirmatory family, the comparisons on
	// the primary metrics, was adjusted for being many.
	Multiplicity Multiplicity
	// SecondaryMultiplicity says how the comparisons on the secondary
	// metrics were adjusted, in a family of their own with the same
	// method; nil when the readout has no secondary metric.
	SecondaryMultiplicity *Multiplicity
	// Segmentation says which segment dimensions the metrics are broken
	// down by, and how far to trust those breakdowns.
	Segmentation Segmentation
	Metrics      []MetricReadout
	Diagnostics  Diagnostics
	// Verdict is the answer first: the decision, its reasons and every
	// treatment's outcome on every metric (NewVerdict).
	Verdict Verdict
	// Warnings are the readout-wide cautions of the analysis (a window
	// with no end); package report adds those the numbers show (sample
	// ratio, exclusions, conditions) and words them all.
	Warnings []Warning
	// Monitoring is the sequential state of a monitored run (--sequential
	// or --history); nil otherwise.
	Monitoring *Monitoring
}

// Families returns the readout's multiple-comparison families: the
// confirmatory (primary) family, then the secondary one when there is one.
func (r Readout) Families() []Multiplicity {
	fs := []Multiplicity{r.Multiplicity}
	if r.SecondaryMultiplicity != nil {
		fs = append(fs, *r.SecondaryMultiplicity)
	}
	return fs
}

// Settings echoes the analysis settings that shaped the numbers.
type Settings struct {
	Alpha float64
	// ConfidenceLevel is the level of every two-sided interval: 1 - alpha
	// for a two-sided alternative, 1 - 2 alpha for a one-sided one (so that
	// the bound on the tested side is the one-sided 1 - alpha bound).
	ConfidenceLevel      float64
	Alternative          string
	MultiArmPolicy       string
	MaturityPolicy       string
	MinCount             int64
	SampleRatioThreshold float64
	// IntervalMethod, DifferenceIntervalMethod and LiftIntervalMethod name
	// the interval methods of the rates, the differences and the lifts.
	IntervalMethod           string
	DifferenceIntervalMethod string
	LiftIntervalMethod       string
	// Adjustment is the multiple-comparison adjustment: none, bonferroni,
	// holm, hochberg, bh or by.
	Adjustment string
	// NonInferiorityMethod names the variance of guardrail tests.
	NonInferiorityMethod string
}

// Multiplicity describes a family of comparisons adjusted together.
type Multiplicity struct {
	// Role is the role of the family's metrics: Primary for the
	// confirmatory family, Secondary for the secondary one.
	Role Role
	// Method is the adjustment (as Settings.Adjustment).
	Method string
	// ErrorRate is what the method controls at alpha: "family-wise error
	// rate", "false discovery rate" or "per comparison" (none).
	ErrorRate string
	// Family says which comparisons form the family.
	Family string
	// Size is the number of comparisons in the family.
	Size int
}

// ArmUnits is one arm of the analysis population (after multi-arm and tie
// exclusions, before per-metric maturity exclusions).
type ArmUnits struct {
	Name          string
	Units         int64
	PlannedShare  float64
	ObservedShare float64
}

// SampleRatio is the Pearson chi-square goodness-of-fit check of units per
// arm against the planned split.
type SampleRatio struct {
	Method    string
	Statistic float64
	DF        int
	PValue    float64
	Threshold float64
	// Mismatch is true when PValue < Threshold.
	Mismatch bool
	// Checked is false when fewer than two arms have units.
	Checked bool
}

// MetricReadout holds one metric's per-arm rates and comparisons.
type MetricReadout struct {
	Name   string
	Events []string
	// WindowSeconds is the attribution window in seconds; nil is unlimited.
	WindowSeconds *int64
	Target        *float64
	// LowerIsBetter marks a metric where a lower rate is the good outcome
	// (unsubscribes, refunds); it sets the direction of guardrail tests
	// and of the readout's wording.
	LowerIsBetter bool
	// Role is the metric's role (Metric.Role); for a guardrail it is not
	// read, and RoleName says "guardrail".
	Role Role
	// Guardrail is set for a guardrail metric: each treatment is tested
	// for non-inferiority against the control with this margin. Guardrail
	// comparisons are outside the multiple-comparison families.
	Guardrail   *Guardrail
	Arms        []ArmRate
	Comparisons []Comparison
	// Segments breaks the metric down by segment: one entry per dimension
	// of Segmentation.Dimensions and value, dimensions in that order and
	// values sorted (null last). Exploratory: see Segmentation.
	Segments []SegmentResult
	Warnings []Warning
}

// Segmentation describes the segment breakdowns of a readout. Segment
// results are exploratory: their comparisons are outside the
// multiple-comparison family, each decided at alpha on its own, so the
// more segments, the more of them look significant by chance.
type Segmentation struct {
	// Dimensions are the segment dimensions, in spec order; empty when the
	// readout has no segment breakdown.
	Dimensions []string
	// Tests is the number of segment comparisons with a test.
	Tests int
}

// SegmentResult is one metric for the units with one value of one segment
// dimension: per-arm rates and each treatment against the control, decided
// at alpha without adjustment (Adjusted is nil and Significant equals
// SignificantUnadjusted) and without guardrail or target tests.
type SegmentResult struct {
	Dimension string
	// Value is the segment value; nil for the null value.
	Value *string
	// Exploratory is always true: a segment result is a lead, not a
	// finding.
	Exploratory bool
	Arms        []ArmRate
	Comparisons []Comparison
}

// Guardrail is the non-inferiority margin of a guardrail metric.
type Guardrail struct {
	// Margin is the margin as given: a difference of rates (0.005 is half a
	// percentage point) or, when Relative, a share of the control's rate.
	Margin   float64
	Relative bool
}

// ArmRate is one arm's conversion rate for one metric.
type ArmRate struct {
	Arm         string
	Units       int64
	Conversions int64
	// Immature counts units whose attribution window had not closed: left
	// out of Units under the exclude policy, counted in Units under include.
	Immature int64
	Rate     *float64
	Interval *Interval
	// TargetTest is set when the metric has a target rate.
	TargetTest *TargetTest
}

// Interval is a two-sided confidence interval.
type Interval struct {
	Lower  float64
	Upper  float64
	Level  float64
	Method string
}

// Test is a z test decided by both routes: the statistic against the
// critical value, and the p-value against alpha.
type Test struct {
	Method            string
	Statistic         float64
	CriticalValue     float64
	PValue            float64
	Alpha             float64
	Alternative       string
	RejectByStatistic bool
	RejectByPValue    bool
}

// ExactTest is an exact test (Fisher's exact test for two arms, the exact
// binomial test against a target).
type ExactTest struct {
	Method      string
	PValue      float64
	Alpha       float64
	Alternative string
	Reject      bool
}

// TargetTest is one arm tested against a fixed target rate p0.
type TargetTest struct {
	Target float64
	Z      *Test
	// ConditionMet is n p0 >= MinCount and n (1 - p0) >= MinCount.
	ConditionMet bool
	Exact        *ExactTest
	// Significant is the decision of the test relied on: the z test when
	// the condition holds, the exact test otherwise.
	Significant bool
	DecidedBy   string
	Warnings    []Warning
}

// Comparison is one treatment arm against the control for one metric.
type Comparison struct {
	Treatment string
	Control   string
	// Difference is p_treatment - p_control.
	Difference         *float64
	DifferenceInterval *Interval
	// RelativeLift is p_treatment / p_control - 1.
	RelativeLift *float64
	LiftInterval *Interval
	Z            *Test
	// ConditionMet is at least MinCount conversions and MinCount
	// non-conversions in both arms.
	ConditionMet bool
	Exact        *ExactTest
	// SignificantUnadjusted is the decision of the test relied on (the z
	// test, or the exact test when the condition fails) at alpha, before
	// any multiple-comparison adjustment.
	SignificantUnadjusted bool
	// Significant is the decision the readout reports: the adjusted one
	// when the comparison is in a family (Adjusted is set), otherwise
	// SignificantUnadjusted.
	Significant bool
	DecidedBy   string
	// Adjusted is the multiple-comparison adjustment of this comparison;
	// nil when it is outside the families (a guardrail, or no test run).
	Adjusted *Adjusted
	// IntervalAgrees is false when the (unadjusted) difference interval's
	// exclusion of zero disagrees with the unadjusted decision.
	IntervalAgrees bool
	// NonInferiority is the guardrail test; nil for other metrics.
	NonInferiority *NonInferiorityTest
	Warnings       []Warning
}

// Adjusted is one comparison's multiple-comparison adjustment.
type Adjusted struct {
	// Family is the role of the family the comparison was adjusted in
	// (Multiplicity.Role).
	Family     Role
	Method     string
	FamilySize int
	PValue     float64
	// Significant is PValue <= alpha.
	Significant bool
	// DifferenceInterval is the simultaneous (Bonferroni) interval of the
	// difference at level 1 - (1 - level)/m: 1 - alpha/m for a two-sided
	// alternative, 1 - 2 alpha/m for a one-sided one. Set for the
	// Bonferroni method only.
	DifferenceInterval *Interval
}

// NonInferiorityTest is a guardrail's non-inferiority z test:
// H0: the treatment is worse than the control by the margin or more.
type NonInferiorityTest struct {
	// AbsoluteMargin is the margin as a difference of rates; for a
	// relative margin, the margin times the control's observed rate.
	AbsoluteMargin float64
	// Z is the one-sided z test of H1: d > -margin, z = (d + margin)/se,
	// alternative "greater"; for a lower-is-better metric H1: d < margin,
	// z = (d - margin)/se, alternative "less" (d = p_t - p_c).
	Z *Test
	// NonInferior is true when H0 is rejected at alpha: the treatment is
	// shown not worse than the margin.
	NonInferior bool
	// Interval is the difference interval whose bound on the harmful side
	// is compared with the margin: two-sided at 1 - 2 alpha.
	Interval *Interval
	Warnings []Warning
}

// Diagnostics accounts for every row read and every unit seen.
type Diagnostics struct {
	// Input is the input shape: event_log, unit_table or counts. A unit
	// table has no events, so its ignored events can only be exposures
	// outside the window; counts have neither events nor units, so
	// exposure rows, multi-arm and tied units are 0 and units exposed is
	// the sum of the arms' units.
	Input    string
	RowsRead int64
	BadRows  []ReasonCount
	// ExposureRows counts this experiment's exposure rows, inside the
	// analysis window or not.
	ExposureRows int64
	// UnitsExposed counts units with at least one in-window exposure.
	UnitsExposed  int64
	MultiArmUnits int64
	// TiedUnits counts units whose earliest exposure rows carry two arms
	// at the same instant (policy first only).
	TiedUnits     int64
	UnitsPerArm   []ArmCount
	Immature      []MetricCount
	IgnoredEvents []ReasonCount
}

// ReasonCount is a count by reason; reasons are snake_case words.
type ReasonCount struct {
	Reason string
	Count  int64
}

// ArmCount is a count of units by arm.
type ArmCount struct {
	Arm   string
	Units int64
}

// MetricCount is a count of units by metric.
type MetricCount struct {
	Metric string
	Units  int64
}
