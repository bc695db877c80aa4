package experiment

import (
	"fmt"
	"slices"
	"time"
)

// MultiArmPolicy says what happens to a unit with in-window exposure rows in
// two or more distinct arms.
type MultiArmPolicy int

const (
	// MultiArmExclude drops the unit from every metric and counts it in the
	// diagnostics. It is the zero value and the default.
	MultiArmExclude MultiArmPolicy = iota
	// MultiArmFirst keeps the arm of the unit's first exposure. A unit whose
	// earliest exposure rows carry two arms at the same instant is excluded
	// and counted as tied.
	MultiArmFirst
)

// String returns the policy's name as flags and readouts spell it.
func (p MultiArmPolicy) String() string {
	switch p {
	case MultiArmExclude:
		return "exclude"
	case MultiArmFirst:
		return "first"
	}
	return fmt.Sprintf("MultiArmPolicy(%d)", int(p))
}

// Valid reports whether p is MultiArmExclude or MultiArmFirst.
func (p MultiArmPolicy) Valid() bool { return p == MultiArmExclude || p == MultiArmFirst }

// ParseMultiArmPolicy parses "exclude" or "first".
func ParseMultiArmPolicy(s string) (MultiArmPolicy, error) {
	switch s {
	case "exclude":
		return MultiArmExclude, nil
	case "first":
		return MultiArmFirst, nil
	}
	return 0, fmt.Errorf("unknown multi-arm policy %q (want exclude or first)", s)
}

// MaturityPolicy says what happens to a unit whose attribution window has not
// closed by the end of the analysis window (or by the data's freshness when
// the window has no end).
type MaturityPolicy int

const (
	// MaturityExclude leaves immature units out of the metric and counts
	// them. It is the zero value and the default.
	MaturityExclude MaturityPolicy = iota
	// MaturityInclude keeps immature units in the metric.
	MaturityInclude
)

// String returns the policy's name as flags and readouts spell it.
func (p MaturityPolicy) String() string {
	switch p {
	case MaturityExclude:
		return "exclude"
	case MaturityInclude:
		return "include"
	}
	return fmt.Sprintf("MaturityPolicy(%d)", int(p))
}

// Valid reports whether p is MaturityExclude or MaturityInclude.
func (p MaturityPolicy) Valid() bool { return p == MaturityExclude || p == MaturityInclude }

// ParseMaturityPolicy parses "exclude" or "include".
func ParseMaturityPolicy(s string) (MaturityPolicy, error) {
	switch s {
	case "exclude":
		return MaturityExclude, nil
	case "include":
		return MaturityInclude, nil
	}
	return 0, fmt.Errorf("unknown maturity policy %q (want exclude or include)", s)
}

// Metric is one conversion metric: a unit converts when at least one event
// whose name is in Events occurs in [t0, t0+Window) (and before the end of
// the analysis window).
type Metric struct {
	// Name is the metric's label in the readout.
	Name string
	// Events is the set of event names that count as a conversion.
	Events []string
	// Window is the attribution window W; 0 means unlimited.
	Window time.Duration
	// Target, when non-nil, is a fixed rate p0 that every arm is tested
	// against with the one-proportion z test.
	Target *float64
	// LowerIsBetter marks a metric where a lower rate is the good outcome.
	LowerIsBetter bool
	// Role says whether the metric decides (Primary, the default) or
	// informs (Secondary); a guardrail's Role is not read. A spec needs
	// at least one primary metric that is not a guardrail.
	Role Role
	// Guardrail, when non-nil, makes this a guardrail metric: each
	// treatment is tested for non-inferiority with this margin, and its
	// comparisons stay out of the multiple-comparison family.
	Guardrail *Margin
}

// Margin is a non-inferiority margin.
type Margin struct {
	// Value is a difference of rates (0.005 is half a percentage point),
	// or, when Relative, a share of the control's rate (0.05 is 5%).
	Value    float64
	Relative bool
}

// Spec describes one experiment: which rows are its exposures, which arm is
// the control, the planned split, the analysis window, the policies and the
// metrics. The zero values of the policies are the defaults of
// experiment/DESIGN.md.
type Spec struct {
	// Key is the experiment key matched against the experiment column of
	// exposure rows. Empty means every exposure row belongs to this
	// experiment (for logs without an experiment column).
	Key string
	// ExposureEvent is the event name of exposure rows.
	ExposureEvent string
	// Control is the control arm's name.
	Control string
	// Arms lists the planned arms in readout order (after the control,
	// which always comes first; see ArmOrder). With no planned arms, the
	// arms seen in the data follow the control by name. May be empty.
	Arms []string
	// Split holds the planned share of each arm in Arms (same length), or
	// is empty for an equal split over the arms in the readout.
	Split []float64
	// Start and End bound the analysis window [Start, End); nil means
	// unbounded on that side.
	Start, End *time.Time
	// AsOf, when set, reruns a past look: rows at or after it, of any
	// event, are ignored (counted as after_as_of) and do not move the
	// data's freshness. The caller also sets End to AsOf when End is
	// later or unset, so that the instant is the analysis end.
	AsOf *time.Time
	// MultiArm and Maturity are the exclusion policies.
	MultiArm MultiArmPolicy
	Maturity MaturityPolicy
	// Metrics are analysed in this order.
	Metrics []Metric
	// Segments names the segment dimensions: columns of the input named
	// after the dimension (nullable utf8). A unit's value of a dimension
	// comes from its first exposure row; when several rows at t0 disagree,
	// the smallest value wins, and a null value counts as larger than every
	// string (so a value beats a null), being a value of its own otherwise.
	// Segment results are exploratory: see Segmentation.
	Segments []string
	// MaxSegmentValues is the most distinct values (null is one) a
	// segment dimension may have; more is a *SegmentLimitError, found as
	// soon as a tally sees it. Zero means DefaultMaxSegmentValues.
	MaxSegmentValues int
}

// validate checks what every input shape needs of a spec: known policies,
// a window that runs forward, a split that matches the arms, arms listed once, named and
// distinct metrics with sane windows and targets, and named, distinct
// segment dimensions. reserved lists names a segment dimension may not take
// (the logical columns of the input).
func (spec Spec) validate(reserved ...string) error {
	if len(spec.Metrics) == 0 {
		return fmt.Errorf("experiment %q: no metrics", spec.Key)
	}
	if !spec.MultiArm.Valid() || !spec.Maturity.Valid() {
		return fmt.Errorf("experiment %q: unknown policy (multi-arm %v, maturity %v)", spec.Key, spec.MultiArm, spec.Maturity)
	}
	if spec.Start != nil && spec.End != nil && !spec.Start.Before(*spec.End) {
		return fmt.Errorf("experiment %q: window start %s is not before end %s",
			spec.Key, spec.Start.UTC().Format(time.RFC3339Nano), spec.End.UTC().Format(time.RFC3339Nano))
	}
	if len(spec.Split) != 0 && len(spec.Split) != len(spec.Arms) {
		return fmt.Errorf("experiment %q: planned split has %d shares for %d arms", spec.Key, len(spec.Split), len(spec.Arms))
	}
	arms := make(map[string]bool, len(spec.Arms))
	for _, a := range spec.Arms {
		if arms[a] {
			return fmt.Errorf("experiment %q: arm %q listed twice", spec.Key, a)
		}
		arms[a] = true
	}
	metrics := make(map[string]bool, len(spec.Metrics))
	for mi, m := range spec.Metrics {
		if m.Name == "" {
			return fmt.Errorf("experiment %q: metric %d has no name", spec.Key, mi+1)
		}
		if metrics[m.Name] {
			return fmt.Errorf("experiment %q: metric %q defined twice", spec.Key, m.Name)
		}
		metrics[m.Name] = true
		if !m.Role.Valid() {
			return fmt.Errorf("experiment %q: metric %q has an unknown role %v", spec.Key, m.Name, m.Role)
		}
		if m.Window < 0 {
			return fmt.Errorf("experiment %q: metric %q has a negative window", spec.Key, m.Name)
		}
		if m.Target != nil && !(*m.Target > 0 && *m.Target < 1) {
			return fmt.Errorf("experiment %q: metric %q: target rate %v is not strictly between 0 and 1", spec.Key, m.Name, *m.Target)
		}
	}
	if !slices.ContainsFunc(spec.Metrics, Metric.isPrimary) {
		return fmt.Errorf("experiment %q: no primary metric: every metric is secondary or a guardrail, "+
			"and only primary metrics decide: make at least one metric primary (--metric, or role = \"primary\" in a spec file)", spec.Key)
	}
	dims := make(map[string]bool, len(spec.Segments))
	for i, d := range spec.Segments {
		if d == "" {
			return fmt.Errorf("experiment %q: segment dimension %d has no name", spec.Key, i+1)
		}
		if dims[d] {
			return fmt.Errorf("experiment %q: segment dimension %q listed twice", spec.Key, d)
		}
		dims[d] = true
		for _, r := range reserved {
			if d == r {
				return fmt.Errorf("experiment %q: segment dimension %q has the name of a column the input already uses", spec.Key, d)
			}
		}
	}
	return nil
}
