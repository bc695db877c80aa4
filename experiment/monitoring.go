package experiment

import "time"

// Sequential method names, as SequentialComparison.Method spells them.
const (
	MethodGroupSequential = "group-sequential"
	MethodMixture         = "mixture"
)

// Monitoring is the state of an experiment watched night after night:
// this look's place in the history, each comparison's sequential test,
// the progress toward the planned units and what changed since the
// previous look. It is computed by package experiment/monitor; the
// fixed-horizon analysis of the readout is unchanged beside it.
type Monitoring struct {
	// Look is this look's number (1-based) among the history's looks of
	// the experiment, those before LookAt and this one.
	Look int
	// LookAt is the look's key: the --as-of instant, else the data's
	// freshness; KeyKind says which ("as-of" or "freshness").
	LookAt  time.Time
	KeyKind string
	// PreviousAt is the key of the previous look; nil at the first.
	PreviousAt *time.Time
	// History is false when no history file was given: the look is then
	// taken as the first.
	History bool
	// PlannedUnits is the planned units per arm (0: none given).
	PlannedUnits int64
	Comparisons  []SequentialComparison
	Progress     []ArmProgress
	// DaysLeft is the days until the slowest arm reaches PlannedUnits at
	// the observed daily rate; nil when not known.
	DaysLeft *float64
	// DetectableEffect is the smallest absolute difference on
	// DetectableMetric (the first primary metric) that a fixed-horizon
	// test at the readout's alpha, adjustment and 80% power detects with
	// the units so far (experiment/plan); nil when it cannot be computed.
	DetectableMetric string
	DetectableEffect *float64
	Changes          []Change
	Alerts           MonitoringAlerts
}

// SequentialComparison is one treatment-versus-control comparison's
// sequential test at this look. Fields that do not apply to the method
// are nil.
type SequentialComparison struct {
	Metric, Treatment, Control string
	// Method is MethodGroupSequential or MethodMixture.
	Method string
	// Spending names the alpha-spending function of a group-sequential
	// test (O'Brien-Fleming-type, Pocock-type).
	Spending string
	// Alpha is the comparison's share of the family's alpha (the
	// Bonferroni split, taken before spending); Sides "one-sided" or
	// "two-sided".
	Alpha float64
	Sides string
	// Look is the comparison's look number (its looks in the history).
	Look                int
	InformationFraction *float64
	AlphaSpent          *float64
	// Boundary is the critical value of this look on the z scale, and
	// BoundaryP the fixed-horizon p-value that equals it.
	Boundary  *float64
	BoundaryP *float64
	// Statistic is this look's z statistic (treatment minus control).
	Statistic *float64
	// Crossed is whether this look is on or beyond its boundary, or the
	// always-valid p-value is at most Alpha; CrossedAtLook is the first
	// look that crossed (0: none), which may be earlier.
	Crossed       bool
	CrossedAtLook int
	// MixingVariance, AlwaysValidP and the confidence sequence are the
	// mixture test's.
	MixingVariance *float64
	AlwaysValidP   *float64
	SequenceLower  *float64
	SequenceUpper  *float64
	// NotTested says why the look was not tested ("" when it was).
	NotTested string
}

// ArmProgress is one arm's units so far on a metric against the plan.
type ArmProgress struct {
	Arm          string
	Units        int64
	PlannedUnits int64
	// DailyUnits is the arm's observed rate of new units per day; nil
	// when the analysis window has no start.
	DailyUnits *float64
}

// Change is one thing that changed since the previous look.
type Change struct {
	// Kind is "decision_flipped", "estimate_moved" or "new_warning" (a
	// warning code the previous look did not have, in Details; Metric
	// and Treatment empty).
	Kind                       string
	Metric, Treatment, Details string
}

// MonitoringAlerts are the conditions a scheduler can act on.
type MonitoringAlerts struct {
	// BoundaryCrossed is whether some comparison has crossed its
	// efficacy boundary (or its always-valid p-value reached alpha).
	BoundaryCrossed bool
	// Stale is whether the data's freshness is older than MaxStaleness
	// at the --as-of instant, else at the run's clock; MaxStaleness 0
	// means not checked.
	Stale        bool
	MaxStaleness time.Duration
	// Age is that instant minus the freshness; nil without freshness.
	Age *time.Duration
}
