package experiment

import (
	"fmt"
	"slices"
)

// Role is a metric's role in a readout: primary metrics decide, secondary
// metrics inform. A guardrail is a metric with a non-inferiority margin
// (Metric.Guardrail, MetricReadout.Guardrail); its Role is not read, and
// outputs call its role "guardrail" (MetricReadout.RoleName).
type Role int

const (
	// Primary metrics form the confirmatory family and decide the
	// readout. It is the zero value and the default.
	Primary Role = iota
	// Secondary metrics are compared too, in a family of their own, and
	// never change a decision.
	Secondary
)

// String returns "primary" or "secondary".
func (r Role) String() string {
	switch r {
	case Primary:
		return "primary"
	case Secondary:
		return "secondary"
	}
	return fmt.Sprintf("Role(%d)", int(r))
}

// Valid reports whether r is Primary or Secondary.
func (r Role) Valid() bool { return r == Primary || r == Secondary }

// ParseRole parses "primary" or "secondary".
func ParseRole(s string) (Role, error) {
	switch s {
	case "primary":
		return Primary, nil
	case "secondary":
		return Secondary, nil
	}
	return 0, fmt.Errorf("unknown metric role %q (want primary or secondary)", s)
}

// RoleGuardrail is the role name outputs give a guardrail metric.
const RoleGuardrail = "guardrail"

// RoleName returns the metric's role as outputs spell it: "guardrail" for
// a guardrail, otherwise the Role's name.
func (m MetricReadout) RoleName() string {
	if m.Guardrail != nil {
		return RoleGuardrail
	}
	return m.Role.String()
}

// isPrimary reports whether a metric decides: primary and not a guardrail.
func (m Metric) isPrimary() bool { return m.Role == Primary && m.Guardrail == nil }

// Outcome is what one comparison of a treatment with the control on one
// metric shows, in a small fixed vocabulary.
type Outcome int

// Outcomes. The zero value is not an outcome.
const (
	// OutcomeBetter: a primary or secondary comparison is significant
	// (the reported, adjusted decision) with the difference in the good
	// direction (up, or down for a lower-is-better metric).
	OutcomeBetter Outcome = iota + 1
	// OutcomeWorse: a primary or secondary comparison is significant in
	// the bad direction; or a guardrail is not shown non-inferior and its
	// unadjusted test is significant in the harmful direction.
	OutcomeWorse
	// OutcomeNoDetectableDifference: a primary or secondary comparison is
	// not significant.
	OutcomeNoDetectableDifference
	// OutcomeGuardrailHeld: the guardrail's non-inferiority test rejects
	// "worse by the margin or more".
	OutcomeGuardrailHeld
	// OutcomeGuardrailNotShown: the guardrail is neither shown
	// non-inferior nor significantly worse.
	OutcomeGuardrailNotShown
	// OutcomeCheckFailed: the comparison is not readable because a data
	// check failed (a sample ratio mismatch).
	OutcomeCheckFailed
	// OutcomeNotEnoughData: no test could be run (an arm without units,
	// so its rate is undefined).
	OutcomeNotEnoughData
)

var outcomeCodes = [...]string{
	OutcomeBetter:                 "better",
	OutcomeWorse:                  "worse",
	OutcomeNoDetectableDifference: "no_detectable_difference",
	OutcomeGuardrailHeld:          "guardrail_held",
	OutcomeGuardrailNotShown:      "guardrail_not_shown",
	OutcomeCheckFailed:            "check_failed",
	OutcomeNotEnoughData:          "not_enough_data",
}

// String returns the outcome's stable snake_case code.
func (o Outcome) String() string {
	if o > 0 && int(o) < len(outcomeCodes) {
		return outcomeCodes[o]
	}
	return fmt.Sprintf("Outcome(%d)", int(o))
}

// Decision is what a readout says to do with a treatment, or with the
// experiment.
type Decision int

// Decisions. The zero value is not a decision.
const (
	// DecisionShip: at least one primary metric is better, none is worse
	// and every guardrail held.
	DecisionShip Decision = iota + 1
	// DecisionStop: a primary metric or a guardrail is worse.
	DecisionStop
	// DecisionWait: nothing decides yet (see the reasons).
	DecisionWait
	// DecisionFixData: a data check failed, so no comparison is readable.
	DecisionFixData
)

var decisionCodes = [...]string{
	DecisionShip:    "ship",
	DecisionStop:    "stop",
	DecisionWait:    "wait",
	DecisionFixData: "fix_data",
}

// String returns the decision's stable snake_case code.
func (d Decision) String() string {
	if d > 0 && int(d) < len(decisionCodes) {
		return decisionCodes[d]
	}
	return fmt.Sprintf("Decision(%d)", int(d))
}

// Reason says why a decision was taken; package report words it.
type Reason int

// Reasons.
const (
	// ReasonSampleRatioMismatch: the sample ratio check failed (fix_data).
	ReasonSampleRatioMismatch Reason = iota + 1
	// ReasonPrimaryBetter: a primary metric is better (ship).
	ReasonPrimaryBetter
	// ReasonGuardrailsHeld: every guardrail held (ship, when there are
	// guardrails).
	ReasonGuardrailsHeld
	// ReasonPrimaryWorse: a primary metric is worse (stop).
	ReasonPrimaryWorse
	// ReasonGuardrailWorse: a guardrail is worse (stop).
	ReasonGuardrailWorse
	// ReasonNoPrimaryDifference: no primary metric shows a difference yet
	// (wait).
	ReasonNoPrimaryDifference
	// ReasonGuardrailNotShown: a guardrail is not shown to hold (wait).
	ReasonGuardrailNotShown
	// ReasonNotEnoughData: a primary metric or a guardrail has no test, or
	// the readout has no treatment (wait).
	ReasonNotEnoughData
)

var reasonCodes = [...]string{
	ReasonSampleRatioMismatch: "sample_ratio_mismatch",
	ReasonPrimaryBetter:       "primary_better",
	ReasonGuardrailsHeld:      "guardrails_held",
	ReasonPrimaryWorse:        "primary_worse",
	ReasonGuardrailWorse:      "guardrail_worse",
	ReasonNoPrimaryDifference: "no_primary_difference",
	ReasonGuardrailNotShown:   "guardrail_not_shown",
	ReasonNotEnoughData:       "not_enough_data",
}

// String returns the reason's stable snake_case code.
func (r Reason) String() string {
	if r > 0 && int(r) < len(reasonCodes) {
		return reasonCodes[r]
	}
	return fmt.Sprintf("Reason(%d)", int(r))
}

// Verdict is the answer first: what to do with the experiment, why, and
// the outcome of every treatment on every metric. Secondary metrics never
// change a decision: they have rows, but only the primary metrics, the
// guardrails and the checks decide.
type Verdict struct {
	// Decision is the readout's decision: fix_data when a check failed,
	// else ship when a treatment ships, else stop when a treatment stops,
	// else wait.
	Decision Decision
	// Treatments names the treatments whose own decision is Decision, in
	// arm order (every treatment for fix_data and wait).
	Treatments []string
	// Reasons are the reasons of those treatments, without repeats, in
	// the order of the Reason constants.
	Reasons []Reason
	// PerTreatment is each treatment's decision, in arm order.
	PerTreatment []TreatmentVerdict
	// Rows are the outcomes in summary order: primary metrics, then
	// secondary, then guardrails; within a role metrics in readout order,
	// and within a metric treatments in arm order.
	Rows []VerdictRow
}

// TreatmentVerdict is one treatment's decision and why.
type TreatmentVerdict struct {
	Treatment string
	Decision  Decision
	Reasons   []Reason
}

// VerdictRow is the outcome of one treatment on one metric. MetricIndex
// indexes Readout.Metrics and ComparisonIndex that metric's Comparisons,
// where the numbers are.
type VerdictRow struct {
	Metric string
	// Role is the metric's role; Guardrail marks a guardrail metric, whose
	// Role is not read. RoleName gives the name outputs print.
	Role            Role
	Guardrail       bool
	Treatment       string
	Outcome         Outcome
	MetricIndex     int
	ComparisonIndex int
}

// RoleName returns the row's role as outputs spell it: "primary",
// "secondary" or "guardrail".
func (row VerdictRow) RoleName() string {
	if row.Guardrail {
		return RoleGuardrail
	}
	return row.Role.String()
}

// NewVerdict derives the verdict of a readout from its metrics, their
// comparisons and the sample ratio check. Analyze sets Readout.Verdict
// with it.
//
// A sample ratio mismatch makes every row check_failed and every decision
// fix_data. Otherwise a primary or secondary row is better or worse when
// its reported (adjusted) decision is significant, by the sign of the
// difference and the metric's direction, and no_detectable_difference
// when not; a guardrail row is guardrail_held when the non-inferiority
// test rejects, worse when the unadjusted test of the comparison is
// significant in the harmful direction, and guardrail_not_shown
// otherwise; a comparison without a test is not_enough_data. Per
// treatment: stop when a primary or guardrail row is worse; ship when a
// primary row is better and every guardrail held; wait otherwise.
// Secondary rows never change a decision.
func NewVerdict(r Readout) Verdict {
	failed := r.SampleRatio.Checked && r.SampleRatio.Mismatch
	var v Verdict
	for _, pass := range []func(MetricReadout) bool{
		func(m MetricReadout) bool { return m.Guardrail == nil && m.Role == Primary },
		func(m MetricReadout) bool { return m.Guardrail == nil && m.Role != Primary },
		func(m MetricReadout) bool { return m.Guardrail != nil },
	} {
		for mi, m := range r.Metrics {
			if !pass(m) {
				continue
			}
			for ci, c := range m.Comparisons {
				row := VerdictRow{Metric: m.Name, Role: m.Role, Guardrail: m.Guardrail != nil,
					Treatment: c.Treatment, MetricIndex: mi, ComparisonIndex: ci}
				row.Outcome = outcomeOf(m, c)
				if failed {
					row.Outcome = OutcomeCheckFailed
				}
				v.Rows = append(v.Rows, row)
			}
		}
	}
	for _, t := range treatments(r) {
		tv := TreatmentVerdict{Treatment: t, Decision: DecisionFixData, Reasons: []Reason{ReasonSampleRatioMismatch}}
		if !failed {
			tv = treatmentVerdict(t, v.Rows)
		}
		v.PerTreatment = append(v.PerTreatment, tv)
	}
	v.Decision, v.Treatments, v.Reasons = readoutDecision(v.PerTreatment, failed)
	return v
}

// treatments returns the readout's arms other than the control, in arm
// order.
func treatments(r Readout) []string {
	var ts []string
	for _, a := range r.Arms {
		if a.Name != r.Control {
			ts = append(ts, a.Name)
		}
	}
	return ts
}

// outcomeOf returns the outcome of one comparison, the checks aside.
func outcomeOf(m MetricReadout, c Comparison) Outcome {
	if c.Difference == nil || (c.Z == nil && c.Exact == nil) {
		return OutcomeNotEnoughData
	}
	good := *c.Difference > 0
	bad := *c.Difference < 0
	if m.LowerIsBetter {
		good, bad = bad, good
	}
	if m.Guardrail != nil {
		switch {
		case c.NonInferiority == nil:
			return OutcomeNotEnoughData
		case c.NonInferiority.NonInferior:
			return OutcomeGuardrailHeld
		case c.SignificantUnadjusted && bad:
			return OutcomeWorse
		}
		return OutcomeGuardrailNotShown
	}
	switch {
	case c.Significant && good:
		return OutcomeBetter
	case c.Significant && bad:
		return OutcomeWorse
	}
	return OutcomeNoDetectableDifference
}

// treatmentVerdict decides one treatment from its primary and guardrail
// rows.
func treatmentVerdict(t string, rows []VerdictRow) TreatmentVerdict {
	var has [len(reasonCodes)]bool
	better, worse, guardrails, held := false, false, 0, 0
	for _, row := range rows {
		if row.Treatment != t || (!row.Guardrail && row.Role != Primary) {
			continue
		}
		if row.Guardrail {
			guardrails++
		}
		switch row.Outcome {
		case OutcomeBetter:
			better = true
			has[ReasonPrimaryBetter] = true
		case OutcomeWorse:
			worse = true
			if row.Guardrail {
				has[ReasonGuardrailWorse] = true
			} else {
				has[ReasonPrimaryWorse] = true
			}
		case OutcomeNoDetectableDifference:
			has[ReasonNoPrimaryDifference] = true
		case OutcomeGuardrailHeld:
			held++
		case OutcomeGuardrailNotShown:
			has[ReasonGuardrailNotShown] = true
		case OutcomeNotEnoughData:
			has[ReasonNotEnoughData] = true
		}
	}
	tv := TreatmentVerdict{Treatment: t}
	keep := func(rs ...Reason) {
		for _, r := range rs {
			if has[r] {
				tv.Reasons = append(tv.Reasons, r)
			}
		}
	}
	switch {
	case worse:
		tv.Decision = DecisionStop
		keep(ReasonPrimaryWorse, ReasonGuardrailWorse)
	case better && held == guardrails:
		tv.Decision = DecisionShip
		has[ReasonGuardrailsHeld] = guardrails > 0
		keep(ReasonPrimaryBetter, ReasonGuardrailsHeld)
	default:
		tv.Decision = DecisionWait
		has[ReasonNoPrimaryDifference] = has[ReasonNoPrimaryDifference] && !better
		keep(ReasonNoPrimaryDifference, ReasonGuardrailNotShown, ReasonNotEnoughData)
		if len(tv.Reasons) == 0 {
			// A treatment without primary comparisons (cannot happen
			// through Analyze, which requires a primary metric).
			tv.Reasons = []Reason{ReasonNotEnoughData}
		}
	}
	return tv
}

// readoutDecision returns the readout's decision, the treatments it names
// and their reasons: fix_data when the check failed, else ship, else stop,
// else wait.
func readoutDecision(per []TreatmentVerdict, failed bool) (Decision, []string, []Reason) {
	d := DecisionWait
	switch {
	case failed:
		d = DecisionFixData
	case slices.ContainsFunc(per, func(t TreatmentVerdict) bool { return t.Decision == DecisionShip }):
		d = DecisionShip
	case slices.ContainsFunc(per, func(t TreatmentVerdict) bool { return t.Decision == DecisionStop }):
		d = DecisionStop
	}
	if len(per) == 0 && !failed {
		return d, nil, []Reason{ReasonNotEnoughData}
	}
	if failed {
		return d, treatmentNames(per), []Reason{ReasonSampleRatioMismatch}
	}
	var reasons []Reason
	for _, t := range per {
		if t.Decision != d {
			continue
		}
		for _, r := range t.Reasons {
			if !slices.Contains(reasons, r) {
				reasons = append(reasons, r)
			}
		}
	}
	slices.Sort(reasons)
	return d, treatmentNames(slices.DeleteFunc(slices.Clone(per), func(t TreatmentVerdict) bool { return t.Decision != d })), reasons
}

// treatmentNames returns the treatments' names.
func treatmentNames(per []TreatmentVerdict) []string {
	var names []string
	for _, t := range per {
		names = append(names, t.Treatment)
	}
	return names
}

// MostUrgent returns the most urgent of several readouts' decisions, the
// one a run reports: fix_data, else stop, else ship, else wait (also for
// no decisions at all). A run puts stop before ship, where a readout puts
// ship first: one stopping experiment needs attention whatever the others
// say.
func MostUrgent(ds []Decision) Decision {
	for _, want := range []Decision{DecisionFixData, DecisionStop, DecisionShip} {
		if slices.Contains(ds, want) {
			return want
		}
	}
	return DecisionWait
}
