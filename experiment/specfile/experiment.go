package specfile

import (
	"fmt"
	"slices"
	"strings"
	"time"

	toml "github.com/pelletier/go-toml/v2"

	"github.com/armtally/armtally/experiment"
)

// parseExperiment checks one [[experiment]] table key by key; Build checks
// the keys against each other.
func (sf *File) parseExperiment(l *locator, i int, fe fileExperiment) (*Settings, error) {
	e := NewSettings()
	e.shape = sf.Shape
	p := fmt.Sprintf("experiment[%d]", i)
	at := func(key string) Origin { return l.at(p + "." + key) }
	e.from["experiment"] = l.at(p)
	e.from["key"] = at("key")
	if fe.Key != nil {
		e.key = *fe.Key
	}
	if err := parseWho(e, at, fe); err != nil {
		return nil, err
	}
	if err := parseWhen(e, at, fe); err != nil {
		return nil, err
	}
	if err := parseAnalysis(e, at, fe); err != nil {
		return nil, err
	}
	if err := parseMonitoring(e, at, fe); err != nil {
		return nil, err
	}
	if fe.Segments != nil {
		seen := map[string]bool{}
		for j, s := range fe.Segments {
			o := at(fmt.Sprintf("segments[%d]", j))
			if s == "" || seen[s] {
				return nil, o.errorf("%q: empty or repeated segment", s)
			}
			seen[s] = true
			if !slices.Contains(sf.Mapping.Segments, s) {
				return nil, o.errorf("%q is not among columns.segments (%s)", s, listOrNone(sf.Mapping.Segments))
			}
		}
		e.SetSegments(fe.Segments, at("segments"))
	}
	var metrics []Metric
	names := map[string]Origin{}
	for j, fm := range fe.Metric {
		ms, err := sf.parseMetric(l, fmt.Sprintf("%s.metric[%d]", p, j), fm, e.exposureEvent)
		if err != nil {
			return nil, err
		}
		if prev, dup := names[ms.Metric.Name]; dup {
			return nil, ms.From.errorf("metric %q is defined twice (first at %s)", ms.Metric.Name, prev)
		}
		names[ms.Metric.Name] = ms.From
		metrics = append(metrics, ms)
	}
	e.SetMetrics(metrics, at("metric"))
	for j, ev := range fe.AllowAbsentEvents {
		o := at(fmt.Sprintf("allow_absent_events[%d]", j))
		if sf.Shape != experiment.InputEventLog {
			return nil, o.errorf("is for input.shape = \"events\" (the shape is %q)", shapeName(sf.Shape))
		}
		if !e.AllowAbsentEvent(ev) {
			return nil, o.errorf("%q is not an event of any metric of this experiment", ev)
		}
	}
	return e, nil
}

// parseWho reads the exposure event, the control, the arms and the split.
func parseWho(e *Settings, at func(string) Origin, fe fileExperiment) error {
	if err := firstError(
		func() error { return setIf(fe.ExposureEvent, at("exposure_event"), e.SetExposureEvent) },
		func() error { return setIf(fe.Control, at("control"), e.SetControl) },
	); err != nil {
		return err
	}
	if fe.Arms != nil {
		seen := map[string]bool{}
		for j, a := range fe.Arms {
			if a == "" || seen[a] {
				return at(fmt.Sprintf("arms[%d]", j)).errorf("%q: empty or repeated arm name", a)
			}
			seen[a] = true
		}
		e.SetArms(fe.Arms, false, at("arms"))
	}
	if fe.Split != nil {
		if j, msg := checkShares(fe.Split); msg != "" {
			return at(fmt.Sprintf("split[%d]", j)).errorf("%v %s", fe.Split[j], msg)
		}
		e.SetSplit(fe.Split, at("split"))
	}
	return nil
}

// parseWhen reads the window and the policies that apply at its edges.
func parseWhen(e *Settings, at func(string) Origin, fe fileExperiment) error {
	for _, b := range []struct {
		key string
		v   any
		set func(*time.Time, Origin)
	}{{"start", fe.Start, e.SetStart}, {"end", fe.End, e.SetEnd}} {
		t, err := fileTime(at(b.key), b.v)
		if err != nil {
			return err
		}
		if t != nil {
			b.set(t, at(b.key))
		}
	}
	if fe.MultiArm != nil {
		p, err := experiment.ParseMultiArmPolicy(*fe.MultiArm)
		if err != nil {
			return at("multi_arm").errorf("%q: want exclude or first", *fe.MultiArm)
		}
		e.SetMultiArm(p, at("multi_arm"))
	}
	if fe.Maturity != nil {
		p, err := experiment.ParseMaturityPolicy(*fe.Maturity)
		if err != nil {
			return at("maturity").errorf("%q: want exclude or include", *fe.Maturity)
		}
		e.SetMaturity(p, at("maturity"))
	}
	return nil
}

// parseAnalysis reads the statistical options.
func parseAnalysis(e *Settings, at func(string) Origin, fe fileExperiment) error {
	return firstError(
		func() error { return setIf(fe.Alpha, at("alpha"), e.SetAlpha) },
		func() error { return setIf(fe.Alternative, at("alternative"), e.SetAlternative) },
		func() error { return setIf(fe.Adjust, at("adjust"), e.SetAdjust) },
		func() error { return setIf(fe.Interval, at("interval"), e.SetInterval) },
		func() error { return setIf(fe.DifferenceInterval, at("difference_interval"), e.SetDifferenceInterval) },
		func() error {
			return setIf(fe.NonInferiorityMethod, at("non_inferiority_method"), e.SetNonInferiorityMethod)
		},
		func() error { return setIf(fe.MinCount, at("min_count"), e.SetMinCount) },
		func() error {
			return setIf(fe.SampleRatioThreshold, at("sample_ratio_threshold"), e.SetSampleRatioThreshold)
		},
	)
}

// setIf calls set with *v and o when the file sets v.
func setIf[T any](v *T, o Origin, set func(T, Origin) error) error {
	if v == nil {
		return nil
	}
	return set(*v, o)
}

// firstError runs the steps in order and returns the first error.
func firstError(steps ...func() error) error {
	for _, step := range steps {
		if err := step(); err != nil {
			return err
		}
	}
	return nil
}

// fileTime reads a window bound: a TOML date (midnight UTC), a date-time
// (UTC unless it has an offset) or a string in a form ParseTime reads.
func fileTime(o Origin, v any) (*time.Time, error) {
	var t time.Time
	switch x := v.(type) {
	case nil:
		return nil, nil
	case toml.LocalDate:
		t = x.AsTime(time.UTC)
	case toml.LocalDateTime:
		t = x.AsTime(time.UTC)
	case time.Time:
		t = x.UTC()
	case string:
		var msg string
		if t, msg = parseTime(x); msg != "" {
			if strings.HasSuffix(msg, yearsRange) {
				return nil, o.errorf("%s", msg)
			}
			return nil, o.errorf("%s, or a TOML date such as 2026-11-02", msg)
		}
	default:
		return nil, o.errorf("wrong type: want a date, a date-time or a string (the file has %s)", tomlKind(v))
	}
	if msg := checkYears(t); msg != "" {
		return nil, o.errorf("%s", msg)
	}
	return &t, nil
}

// tomlKind names the TOML kind of a decoded value.
func tomlKind(v any) string {
	switch v.(type) {
	case bool:
		return "a boolean"
	case int64:
		return "an integer"
	case float64:
		return "a float"
	case string:
		return "a string"
	case toml.LocalTime:
		return "a local time"
	case toml.LocalDate, toml.LocalDateTime, time.Time:
		return "a date"
	case []any:
		return "an array"
	case map[string]any:
		return "a table"
	}
	return fmt.Sprintf("a %T", v)
}
