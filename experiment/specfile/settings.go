package specfile

import (
	"slices"
	"strings"
	"time"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/pipeline"
	"github.com/armtally/armtally/experiment/stats"
	"github.com/armtally/armtally/ingest"
)

// Settings are the settings of one experiment as a spec file and the
// command line give them, with where each came from, before they are
// checked against each other and turned into an experiment.Spec and
// experiment.AnalysisOptions by Build. The setters that take a string or
// a number check it and return an error naming the origin; the others
// take values their caller has checked.
type Settings struct {
	shape experiment.InputShape // the input shape the experiment is read from

	key, exposureEvent, control string
	arms                        []string
	// armsAddControl puts a control that the arms leave out first (a spec
	// file must list it).
	armsAddControl bool
	split          []float64
	start, end     *time.Time
	multiArm       experiment.MultiArmPolicy
	maturity       experiment.MaturityPolicy
	metrics        []Metric
	segments       []string
	maxSegValues   int
	opts           experiment.AnalysisOptions
	// allowAbsent lists events that may occur in no row of the log.
	allowAbsent []string
	// plannedUnits and mixingVariance are the monitoring settings of
	// experiment.planned_units and experiment.mixing_variance, 0 when not
	// set.
	plannedUnits   int64
	mixingVariance float64

	// from says where a setting came from, by its spec-file key name
	// ("split", "arms", "metrics", ...); absent means the default.
	from map[string]Origin
}

// Metric is one metric of an experiment with its role and where it was
// defined.
type Metric struct {
	Metric experiment.Metric
	Role   Role
	// Column is the metric's 0/1 column of a unit table; "" means the
	// metric's name.
	Column string
	From   Origin
	// Sequential is the metric's sequential method from
	// experiment.metric.sequential ("obf", "pocock", "mixture" or "fixed"), "" when
	// not set; SequentialFrom is where it was set.
	Sequential     string
	SequentialFrom Origin
}

// experimentMetric returns the metric with its role: a secondary metric
// is experiment.Secondary; a guardrail's role is its margin.
func (ms Metric) experimentMetric() experiment.Metric {
	m := ms.Metric
	m.Role = experiment.Primary
	if ms.Role == Secondary {
		m.Role = experiment.Secondary
	}
	return m
}

// NewSettings returns the defaults of an experiment read from an event
// log: exposure event "exposure", control "control", the default policies
// and analysis options, no metrics.
func NewSettings() *Settings {
	opts := experiment.DefaultAnalysisOptions()
	opts.Stats.Level = 0 // 1 - alpha, or 1 - 2 alpha for a one-sided alternative
	return &Settings{shape: experiment.InputEventLog, exposureEvent: "exposure", control: "control", opts: opts,
		from: map[string]Origin{}}
}

// Key returns the experiment's key ("" when none is set).
func (e *Settings) Key() string { return e.key }

// SetKey sets the experiment key.
func (e *Settings) SetKey(key string, o Origin) {
	e.key = key
	e.from["key"] = o
}

// SetExposureEvent sets the event name of exposure rows.
func (e *Settings) SetExposureEvent(name string, o Origin) error {
	return e.setName(&e.exposureEvent, "exposure_event", name, o)
}

// SetControl sets the name of the control arm.
func (e *Settings) SetControl(name string, o Origin) error {
	return e.setName(&e.control, "control", name, o)
}

func (e *Settings) setName(dst *string, key, name string, o Origin) error {
	if name == "" {
		return o.errorf("must not be empty")
	}
	*dst = name
	e.from[key] = o
	return nil
}

// SetArms sets the planned arms, distinct names that are not empty. With
// addControl, a control the arms leave out is put first; without, Build
// refuses it.
func (e *Settings) SetArms(arms []string, addControl bool, o Origin) {
	e.arms, e.armsAddControl = arms, addControl
	e.from["arms"] = o
}

// SetSplit sets the planned traffic shares of the arms, positive numbers
// (nil for equal shares).
func (e *Settings) SetSplit(shares []float64, o Origin) {
	e.split = shares
	e.from["split"] = o
}

// SetStart sets the start of the analysis window (nil for none).
func (e *Settings) SetStart(t *time.Time, o Origin) {
	e.start = t
	e.from["start"] = o
}

// SetEnd sets the end of the analysis window (nil for none).
func (e *Settings) SetEnd(t *time.Time, o Origin) {
	e.end = t
	e.from["end"] = o
}

// SetMultiArm sets the policy for units exposed to several arms.
func (e *Settings) SetMultiArm(p experiment.MultiArmPolicy, o Origin) {
	e.multiArm = p
	e.from["multi_arm"] = o
}

// SetMaturity sets the policy for units whose window has not closed.
func (e *Settings) SetMaturity(p experiment.MaturityPolicy, o Origin) {
	e.maturity = p
	e.from["maturity"] = o
}

// SetMetrics replaces the metrics, distinct names.
func (e *Settings) SetMetrics(ms []Metric, o Origin) {
	e.metrics = ms
	e.from["metrics"] = o
}

// SetSegments replaces the segment columns, distinct names.
func (e *Settings) SetSegments(segments []string, o Origin) {
	e.segments = segments
	e.from["segments"] = o
}

// AddSegment adds a segment column unless the experiment has it already.
func (e *Settings) AddSegment(name string) {
	if !slices.Contains(e.segments, name) {
		e.segments = append(e.segments, name)
	}
}

// MaxMaxSegmentValues is the largest limit of distinct values per segment
// dimension: the readout has a table row per value, arm and metric.
const MaxMaxSegmentValues = 100_000

// SetMaxSegmentValues sets the most distinct values a segment dimension
// may have, from 1 to MaxMaxSegmentValues (the default is
// experiment.DefaultMaxSegmentValues).
func (e *Settings) SetMaxSegmentValues(n int64, o Origin) error {
	if n < 1 || n > MaxMaxSegmentValues {
		return o.errorf("%d: want 1 to %d", n, MaxMaxSegmentValues)
	}
	e.maxSegValues = int(n)
	return nil
}

// MarkLowerIsBetter marks the metric name as one where a lower rate is the
// good outcome, and reports whether the experiment has such a metric.
func (e *Settings) MarkLowerIsBetter(name string) bool {
	found := false
	for i := range e.metrics {
		if e.metrics[i].Metric.Name == name {
			e.metrics[i].Metric.LowerIsBetter, found = true, true
		}
	}
	return found
}

// AllowAbsentEvent lets the event occur in no row of the event log (a
// genuinely rare event; without it, such an event of a metric stops the
// run), and reports whether one of the experiment's metrics counts it.
func (e *Settings) AllowAbsentEvent(event string) bool {
	if !slices.Contains(e.allowAbsent, event) {
		e.allowAbsent = append(e.allowAbsent, event)
	}
	return slices.ContainsFunc(e.metrics, func(ms Metric) bool { return slices.Contains(ms.Metric.Events, event) })
}

// AllowAbsentEvents returns the events allowed to occur in no row
// (AllowAbsentEvent) that the experiment's metrics count, for
// pipeline.Experiment.AllowAbsentEvents. An allowance left over from metrics
// that flags replaced is dropped.
func (e *Settings) AllowAbsentEvents() []string {
	var out []string
	for _, ev := range e.allowAbsent {
		if slices.ContainsFunc(e.metrics, func(ms Metric) bool { return slices.Contains(ms.Metric.Events, ev) }) {
			out = append(out, ev)
		}
	}
	return out
}

// MetricColumns maps each metric to its column of a unit table.
func (e *Settings) MetricColumns() []ingest.ColumnMap {
	var out []ingest.ColumnMap
	for _, ms := range e.metrics {
		col := ms.Column
		if col == "" {
			col = ms.Metric.Name
		}
		out = append(out, ingest.ColumnMap{Logical: ms.Metric.Name, Physical: col})
	}
	return out
}

// MinAlpha is the smallest significance level armtally accepts. Below
// it the confidence level 1 - alpha loses alpha's digits in a float64
// (below about 5.6e-17 it is exactly 1 and no interval can be computed),
// and the readouts, which print the level to six decimals of a percent,
// would show it as 100%.
const MinAlpha = 1e-8

// MinSampleRatioThreshold is the smallest sample ratio threshold armtally
// accepts: a p-value threshold below it would be printed in the readout
// as a long run of zeros and means no real check.
const MinSampleRatioThreshold = 1e-12

// MaxMinCount is the largest --min-count (min_count) armtally accepts.
const MaxMinCount = 1_000_000_000

// SetAlpha sets the significance level, from MinAlpha to below 0.5.
func (e *Settings) SetAlpha(v float64, o Origin) error {
	if !(v > 0 && v < 0.5) {
		return o.errorf("%v is not strictly between 0 and 0.5", v)
	}
	if v < MinAlpha {
		return o.errorf("%v is too small: want %g <= alpha < 0.5 (below %g the confidence level 1 - alpha cannot be computed or shown)", v, MinAlpha, MinAlpha)
	}
	e.opts.Stats.Alpha = v
	e.from["alpha"] = o
	return nil
}

// SetAlternative sets the alternative hypothesis: two-sided, greater or
// less.
func (e *Settings) SetAlternative(s string, o Origin) error {
	a, err := stats.ParseAlternative(s)
	if err != nil {
		return o.errorf("%v", err)
	}
	e.opts.Stats.Alternative = a
	return nil
}

// SetAdjust sets the multiple-comparison adjustment.
func (e *Settings) SetAdjust(s string, o Origin) error {
	m, err := stats.ParseAdjustMethod(s)
	if err != nil {
		return o.errorf("%v", err)
	}
	e.opts.Adjust = m
	return nil
}

// SetInterval sets the interval of each arm's rate.
func (e *Settings) SetInterval(s string, o Origin) error {
	m, err := experiment.ParseIntervalMethod(s)
	if err != nil {
		return o.errorf("%v", err)
	}
	e.opts.Interval = m
	return nil
}

// SetDifferenceInterval sets the interval of each difference.
func (e *Settings) SetDifferenceInterval(s string, o Origin) error {
	m, err := experiment.ParseDifferenceMethod(s)
	if err != nil {
		return o.errorf("%v", err)
	}
	e.opts.Difference = m
	return nil
}

// SetNonInferiorityMethod sets the variance of the guardrail tests.
func (e *Settings) SetNonInferiorityMethod(s string, o Origin) error {
	m, err := stats.ParseNonInferiorityMethod(s)
	if err != nil {
		return o.errorf("%v", err)
	}
	e.opts.NonInferiority = m
	return nil
}

// SetMinCount sets the conversions and non-conversions per arm needed to
// trust the normal approximation, from 1 to MaxMinCount.
func (e *Settings) SetMinCount(n int64, o Origin) error {
	if n < 1 {
		return o.errorf("%d: must be at least 1", n)
	}
	if n > MaxMinCount {
		return o.errorf("%d is too large: want 1 to %d", n, MaxMinCount)
	}
	e.opts.Stats.MinCount = n
	return nil
}

// SetSampleRatioThreshold sets the p-value below which the sample ratio
// check fails, from MinSampleRatioThreshold to below 1.
func (e *Settings) SetSampleRatioThreshold(v float64, o Origin) error {
	if !(v > 0 && v < 1) {
		return o.errorf("%v is not strictly between 0 and 1", v)
	}
	if v < MinSampleRatioThreshold {
		return o.errorf("%v is too small: want %g <= threshold < 1", v, MinSampleRatioThreshold)
	}
	e.opts.SampleRatioThreshold = v
	return nil
}

// Build checks the settings against each other and returns the
// experiment's spec and analysis options. Primary metrics come first, then
// the others in the order given. A contradiction is reported against the
// setting that came last to it: an *Error for a file key, a *FlagError for
// a flag or a default.
func (e *Settings) Build() (experiment.Spec, experiment.AnalysisOptions, error) {
	spec := experiment.Spec{
		Key: e.key, ExposureEvent: e.exposureEvent, Control: e.control,
		Start: e.start, End: e.end, MultiArm: e.multiArm, Maturity: e.maturity,
		Segments:         append([]string(nil), e.segments...),
		MaxSegmentValues: e.maxSegValues,
	}
	if err := e.buildArms(&spec); err != nil {
		return spec, e.opts, err
	}
	if spec.Start != nil && spec.End != nil && !spec.Start.Before(*spec.End) {
		return spec, e.opts, e.from["end"].errorf("the window ends at %s, not after its start %s (%s)",
			spec.End.Format(time.RFC3339Nano), spec.Start.Format(time.RFC3339Nano), e.originOf("start"))
	}
	if len(e.metrics) == 0 {
		if o := e.from["experiment"]; o.File != "" {
			return spec, e.opts, o.errorf("experiment %q has no metrics: add a [[experiment.metric]] table", e.key)
		}
		return spec, e.opts, flagErrorf("name at least one metric with --metric NAME=EVENT[:WINDOW], for example --metric purchase=purchase:7d")
	}
	if err := e.checkShape(); err != nil {
		return spec, e.opts, err
	}
	for _, primary := range []bool{true, false} {
		for _, ms := range e.metrics {
			if primary == (ms.Role == Primary) {
				spec.Metrics = append(spec.Metrics, ms.experimentMetric())
			}
		}
	}
	if err := pipeline.Check(e.shape, spec); err != nil {
		if o := e.from["experiment"]; o.File != "" {
			return spec, e.opts, o.errorf("%v", err)
		}
		return spec, e.opts, flagErrorf("%v", err)
	}
	return spec, e.opts, nil
}

// buildArms puts the arms and the split into spec.
func (e *Settings) buildArms(spec *experiment.Spec) error {
	if len(e.arms) > 0 {
		spec.Arms = append([]string(nil), e.arms...)
		if !slices.Contains(spec.Arms, spec.Control) {
			if !e.armsAddControl {
				return e.from["arms"].errorf("the control %q (%s) is not among the arms (%s)",
					spec.Control, e.originOf("control"), strings.Join(spec.Arms, ", "))
			}
			spec.Arms = append([]string{spec.Control}, spec.Arms...)
		}
	}
	if len(e.split) == 0 {
		return nil
	}
	o := e.from["split"]
	if len(spec.Arms) == 0 {
		if o.Flag != "" {
			return flagErrorf("--split needs --arms to say which arm each share belongs to")
		}
		return o.errorf("a split needs the arms it belongs to (arms = [...])")
	}
	if len(e.split) != len(spec.Arms) {
		return o.errorf("%d shares for %d arms (%s, from %s)", len(e.split), len(spec.Arms),
			strings.Join(spec.Arms, ", "), e.originOf("arms"))
	}
	spec.Split = append([]float64(nil), e.split...)
	return nil
}

// originOf names where the setting came from, or "the default" when no
// flag or key set it.
func (e *Settings) originOf(name string) string {
	if o, ok := e.from[name]; ok && o.set() {
		return o.String()
	}
	return "the default"
}
