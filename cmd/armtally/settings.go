package main

import (
	"strings"
	"time"

	"github.com/apache/arrow-go/v18/arrow"

	"github.com/armtally/armtally/experiment"
	"github.com/armtally/armtally/experiment/stats"
)

// expSettings are the settings of one experiment as a spec file and the
// command line give them, with where each came from, before they are
// checked against each other and turned into an experiment.Spec and
// experiment.AnalysisOptions by build.
type expSettings struct {
	index int    // position in the spec file; -1 for an experiment from flags alone
	shape string // input.shape: events (also for flags alone), units or counts

	key, exposureEvent, control string
	arms                        []string
	// armsAddControl puts a control that --arms leaves out first (a spec
	// file must list it).
	armsAddControl bool
	split          []float64
	start, end     *time.Time
	multiArm       experiment.MultiArmPolicy
	maturity       experiment.MaturityPolicy
	metrics        []metricSetting
	segments       []string
	opts           experiment.AnalysisOptions

	// from says where a setting came from, by its spec-file key name
	// ("split", "arms", "metrics", ...); absent means the default.
	from map[string]origin
}

// metricSetting is one metric with its role and where it was defined.
type metricSetting struct {
	metric experiment.Metric
	role   string // primary, secondary or guardrail
	from   origin
	// column is the metric's 0/1 column for input.shape = "units".
	column     string
	columnFrom origin
}

// newExpSettings returns the defaults: exposure event "exposure", control
// "control", the default policies and analysis options.
func newExpSettings() *expSettings {
	opts := experiment.DefaultAnalysisOptions()
	opts.Stats.Level = 0 // 1 - alpha, or 1 - 2 alpha for a one-sided alternative
	return &expSettings{index: -1, shape: shapeEvents, exposureEvent: "exposure", control: "control", opts: opts,
		from: map[string]origin{}}
}

func (e *expSettings) setAlpha(v float64, o origin) error {
	if !(v > 0 && v < 0.5) {
		return o.errorf("%v is not strictly between 0 and 0.5", v)
	}
	e.opts.Stats.Alpha = v
	e.from["alpha"] = o
	return nil
}

func (e *expSettings) setAlternative(s string, o origin) error {
	a, err := stats.ParseAlternative(s)
	if err != nil {
		return o.errorf("%v", err)
	}
	e.opts.Stats.Alternative = a
	return nil
}

func (e *expSettings) setAdjust(s string, o origin) error {
	m, err := stats.ParseAdjustMethod(s)
	if err != nil {
		return o.errorf("%v", err)
	}
	e.opts.Adjust = m
	return nil
}

func (e *expSettings) setInterval(s string, o origin) error {
	m, err := experiment.ParseIntervalMethod(s)
	if err != nil {
		return o.errorf("%v", err)
	}
	e.opts.Interval = m
	return nil
}

func (e *expSettings) setDifferenceInterval(s string, o origin) error {
	m, err := experiment.ParseDifferenceMethod(s)
	if err != nil {
		return o.errorf("%v", err)
	}
	e.opts.Difference = m
	return nil
}

func (e *expSettings) setNonInferiority(s string, o origin) error {
	m, err := stats.ParseNonInferiorityMethod(s)
	if err != nil {
		return o.errorf("%v", err)
	}
	e.opts.NonInferiority = m
	return nil
}

func (e *expSettings) setMinCount(n int64, o origin) error {
	if n < 1 {
		return o.errorf("%d: must be at least 1", n)
	}
	e.opts.Stats.MinCount = n
	return nil
}

func (e *expSettings) setSampleRatioThreshold(v float64, o origin) error {
	if !(v > 0 && v < 1) {
		return o.errorf("%v is not strictly between 0 and 1", v)
	}
	e.opts.SampleRatioThreshold = v
	return nil
}

// build checks the settings against each other and returns the
// experiment's spec and analysis options. Primary metrics come first, then
// the others in the order given.
func (e *expSettings) build() (experiment.Spec, experiment.AnalysisOptions, error) {
	spec := experiment.Spec{
		Key: e.key, ExposureEvent: e.exposureEvent, Control: e.control,
		Start: e.start, End: e.end, MultiArm: e.multiArm, Maturity: e.maturity,
		Segments: append([]string(nil), e.segments...),
	}
	if len(e.arms) > 0 {
		spec.Arms = append([]string(nil), e.arms...)
		if !contains(spec.Arms, spec.Control) {
			if !e.armsAddControl {
				return spec, e.opts, e.from["arms"].errorf("the control %q (%s) is not among the arms (%s)",
					spec.Control, e.originOf("control", "--control"), strings.Join(spec.Arms, ", "))
			}
			spec.Arms = append([]string{spec.Control}, spec.Arms...)
		}
	}
	if len(e.split) > 0 {
		o := e.from["split"]
		if len(spec.Arms) == 0 {
			if o.flag != "" {
				return spec, e.opts, usagef("analyze: --split needs --arms to say which arm each share belongs to")
			}
			return spec, e.opts, o.errorf("a split needs the arms it belongs to (arms = [...])")
		}
		if len(e.split) != len(spec.Arms) {
			return spec, e.opts, o.errorf("%d shares for %d arms (%s, from %s)", len(e.split), len(spec.Arms),
				strings.Join(spec.Arms, ", "), e.originOf("arms", "--arms"))
		}
		spec.Split = append([]float64(nil), e.split...)
	}
	if spec.Start != nil && spec.End != nil && !spec.Start.Before(*spec.End) {
		return spec, e.opts, e.from["end"].errorf("the window ends at %s, not after its start %s (%s)",
			spec.End.Format(time.RFC3339Nano), spec.Start.Format(time.RFC3339Nano), e.originOf("start", "--start"))
	}
	if len(e.metrics) == 0 {
		if o := e.from["experiment"]; o.file != "" {
			return spec, e.opts, o.errorf("experiment %q has no metrics: add a [[experiment.metric]] table", e.key)
		}
		return spec, e.opts, usagef("analyze: name at least one metric with --metric NAME=EVENT[:WINDOW], for example --metric purchase=purchase:7d")
	}
	for _, role := range []string{rolePrimary, ""} {
		for _, ms := range e.metrics {
			if (role == rolePrimary) == (ms.role == rolePrimary) {
				spec.Metrics = append(spec.Metrics, ms.metric)
			}
		}
	}
	if _, err := newTallier(e.shape, spec); err != nil {
		if o := e.from["experiment"]; o.file != "" {
			return spec, e.opts, o.errorf("%v", err)
		}
		return spec, e.opts, usagef("analyze: %v", err)
	}
	return spec, e.opts, nil
}

// originOf names where the setting came from, or def when it is a default
// that no flag or key set.
func (e *expSettings) originOf(name, def string) string {
	if o, ok := e.from[name]; ok && (o.flag != "" || o.file != "") {
		return o.String()
	}
	return "the default"
}

// tallier is what the three input shapes' talliers have in common.
type tallier interface {
	Add(arrow.RecordBatch) error
	Tally() (experiment.Tally, error)
}

// newTallier returns the tallier of the input shape for spec.
func newTallier(shape string, spec experiment.Spec) (tallier, error) {
	switch shape {
	case shapeUnits:
		return experiment.NewUnitTableTallier(spec)
	case shapeCounts:
		return experiment.NewCountsTallier(spec)
	}
	return experiment.NewTallier(spec)
}
