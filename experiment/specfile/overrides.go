package specfile

import (
	"strings"
	"time"

	"github.com/armtally/armtally/experiment"
)

// Overrides are one experiment's settings as a command line gives them, in
// the text the user typed, to apply over a spec file's experiments or, with
// no file, to make the one experiment. Each field belongs to a flag named
// in its comment; Given says which flags the user gave.
type Overrides struct {
	// Given reports whether the flag of that name (without dashes) was
	// given; nil means none was.
	Given func(flag string) bool

	// Shape is --input-shape: events, units or counts.
	Shape         string
	Experiment    string   // --experiment
	ExposureEvent string   // --exposure-event
	Control       string   // --control
	Arms          []string // --arms
	Split         string   // --split
	Start, End    string   // --start, --end
	MultiArm      string   // --multi-arm
	Maturity      string   // --maturity
	Metrics       []string // --metric
	Secondary     []string // --secondary-metric
	Guardrails    []string // --guardrail

	Alpha                float64 // --alpha
	Alternative          string  // --alternative
	Adjust               string  // --adjust
	Interval             string  // --interval
	DifferenceInterval   string  // --difference-interval
	NonInferiorityMethod string  // --non-inferiority-method
	MinCount             int64   // --min-count
	SampleRatioThreshold float64 // --sample-ratio-threshold
	// MaxSegmentValues is --max-segment-values; zero, unless Given says
	// the flag was given, leaves the default.
	MaxSegmentValues int64
}

// flagOrigin is the origin of a setting from the flag --name.
func flagOrigin(name string) Origin { return Origin{Flag: "--" + name} }

// Apply applies the overrides to e: every one when all is set (no spec
// file, or one without experiments), otherwise only the flags given,
// which override the file. The experiment key is set only when all is set
// (with a spec file, --experiment picks experiments instead). Problems are
// *FlagError values that name the flag.
func (o Overrides) Apply(e *Settings, all bool) error {
	set := func(name string) bool { return all || o.Given != nil && o.Given(name) }
	if all {
		e.SetKey(o.Experiment, flagOrigin("experiment"))
	}
	if set("input-shape") && (o.Shape != "" || !all) {
		shape, err := ParseShape(o.Shape)
		if err != nil {
			return flagErrorf("--input-shape %v", err)
		}
		e.SetShape(shape, flagOrigin("input-shape"))
	}
	for _, apply := range []func(func(string) bool, *Settings) error{o.applyArms, o.applyWindow, o.applyMetrics, o.applyAnalysis} {
		if err := apply(set, e); err != nil {
			return err
		}
	}
	return nil
}

// applyArms applies --exposure-event, --control, --arms and --split.
func (o Overrides) applyArms(set func(string) bool, e *Settings) error {
	for _, s := range []struct {
		flag string
		v    string
		fn   func(string, Origin) error
	}{{"exposure-event", o.ExposureEvent, e.SetExposureEvent}, {"control", o.Control, e.SetControl}} {
		if !set(s.flag) {
			continue
		}
		if s.v == "" {
			return flagErrorf("--exposure-event and --control must not be empty")
		}
		if err := s.fn(s.v, flagOrigin(s.flag)); err != nil {
			return err
		}
	}
	if set("arms") {
		var arms []string
		seen := map[string]bool{}
		for _, a := range o.Arms {
			a = strings.TrimSpace(a)
			if a == "" || seen[a] {
				return flagErrorf("--arms %q: empty or repeated arm name", strings.Join(o.Arms, ","))
			}
			seen[a] = true
			arms = append(arms, a)
		}
		e.SetArms(arms, true, flagOrigin("arms"))
	}
	if set("split") {
		var shares []float64
		if o.Split != "" {
			var err error
			if shares, err = ParseShares(o.Split); err != nil {
				return flagErrorf("--split %v", err)
			}
		}
		e.SetSplit(shares, flagOrigin("split"))
	}
	return nil
}

// applyWindow applies --start, --end, --multi-arm and --maturity.
func (o Overrides) applyWindow(set func(string) bool, e *Settings) error {
	for _, b := range []struct {
		flag, v string
		fn      func(*time.Time, Origin)
	}{{"start", o.Start, e.SetStart}, {"end", o.End, e.SetEnd}} {
		if !set(b.flag) {
			continue
		}
		t, err := ParseTime(b.v)
		if err != nil {
			return flagErrorf("--%s %v", b.flag, err)
		}
		b.fn(t, flagOrigin(b.flag))
	}
	if set("multi-arm") {
		p, err := experiment.ParseMultiArmPolicy(o.MultiArm)
		if err != nil {
			return flagErrorf("--multi-arm: %v", err)
		}
		e.SetMultiArm(p, flagOrigin("multi-arm"))
	}
	if set("maturity") {
		p, err := experiment.ParseMaturityPolicy(o.Maturity)
		if err != nil {
			return flagErrorf("--maturity: %v", err)
		}
		e.SetMaturity(p, flagOrigin("maturity"))
	}
	return nil
}

// applyMetrics applies --metric, --secondary-metric and --guardrail,
// which together replace the file's metrics. With a unit or counts table
// as the input, the EVENT part of each names the metric's column or is left
// out (see tableMetric).
func (o Overrides) applyMetrics(set func(string) bool, e *Settings) error {
	if !set("metric") && !set("secondary-metric") && !set("guardrail") {
		return nil
	}
	var ms []Metric
	for _, f := range []struct {
		flag string
		defs []string
		role Role
	}{{"metric", o.Metrics, Primary}, {"secondary-metric", o.Secondary, Secondary}} {
		for _, s := range f.defs {
			m, err := ParseMetric(s)
			if err != nil {
				return flagErrorf("--%s: %v", f.flag, err)
			}
			ms = append(ms, Metric{Metric: m, Role: f.role, From: flagOrigin(f.flag)})
		}
	}
	for _, s := range o.Guardrails {
		m, err := ParseGuardrail(s)
		if err != nil {
			return flagErrorf("--guardrail: %v", err)
		}
		ms = append(ms, Metric{Metric: m, Role: Guardrail, From: flagOrigin("guardrail")})
	}
	if e.shape != experiment.InputEventLog {
		texts := append(append(append([]string(nil), o.Metrics...), o.Secondary...), o.Guardrails...)
		for i := range ms {
			if err := tableMetric(&ms[i], e.shape, strings.TrimPrefix(ms[i].From.Flag, "--"), texts[i]); err != nil {
				return err
			}
		}
	}
	e.SetMetrics(ms, flagOrigin("metric"))
	return nil
}

// applyAnalysis applies the flags of the statistical options.
func (o Overrides) applyAnalysis(set func(string) bool, e *Settings) error {
	from := flagOrigin
	for _, s := range []struct {
		flag  string
		apply func() error
	}{
		{"alpha", func() error { return e.SetAlpha(o.Alpha, from("alpha")) }},
		{"alternative", func() error { return e.SetAlternative(o.Alternative, from("alternative")) }},
		{"adjust", func() error { return e.SetAdjust(o.Adjust, from("adjust")) }},
		{"interval", func() error { return e.SetInterval(o.Interval, from("interval")) }},
		{"difference-interval", func() error { return e.SetDifferenceInterval(o.DifferenceInterval, from("difference-interval")) }},
		{"non-inferiority-method", func() error {
			return e.SetNonInferiorityMethod(o.NonInferiorityMethod, from("non-inferiority-method"))
		}},
		{"min-count", func() error { return e.SetMinCount(o.MinCount, from("min-count")) }},
		{"sample-ratio-threshold", func() error {
			return e.SetSampleRatioThreshold(o.SampleRatioThreshold, from("sample-ratio-threshold"))
		}},
		{"max-segment-values", func() error {
			// Zero, not given, keeps the default for callers that
			// leave the field unset.
			if o.MaxSegmentValues == 0 && (o.Given == nil || !o.Given("max-segment-values")) {
				return nil
			}
			return e.SetMaxSegmentValues(o.MaxSegmentValues, from("max-segment-values"))
		}},
	} {
		if !set(s.flag) {
			continue
		}
		if err := s.apply(); err != nil {
			return err
		}
	}
	return nil
}
