package specfile

import "math"

// Monitoring is one experiment's nightly-monitoring settings from a spec
// file: the sequential method of each metric and the settings those
// methods need. The command line's --sequential, --planned-units and
// --mixing-variance override them.
type Monitoring struct {
	// Sequential maps a metric's name to its method, one of
	// "obf", "pocock", "mixture" or "fixed", for the metrics whose experiment.metric.sequential
	// is set; From says where each was set.
	Sequential map[string]string
	From       map[string]Origin
	// PlannedUnits is experiment.planned_units, the planned units per arm
	// (0 when not set); PlannedFrom is where it was set.
	PlannedUnits int64
	PlannedFrom  Origin
	// MixingVariance is experiment.mixing_variance, tau^2 of the mixture
	// test (0 when not set).
	MixingVariance float64
}

// Monitoring returns the experiment's monitoring settings.
func (e *Settings) Monitoring() Monitoring {
	m := Monitoring{Sequential: map[string]string{}, From: map[string]Origin{},
		PlannedUnits: e.plannedUnits, PlannedFrom: e.from["planned_units"], MixingVariance: e.mixingVariance}
	for _, ms := range e.metrics {
		if ms.Sequential != "" {
			m.Sequential[ms.Metric.Name], m.From[ms.Metric.Name] = ms.Sequential, ms.SequentialFrom
		}
	}
	return m
}

// SetPlannedUnits sets the planned units per arm, a positive number.
func (e *Settings) SetPlannedUnits(n int64, o Origin) error {
	if n <= 0 {
		return o.errorf("%d: want a positive number of units per arm (the plan's units per arm, from 'armtally plan')", n)
	}
	e.plannedUnits = n
	e.from["planned_units"] = o
	return nil
}

// SetMixingVariance sets tau^2 of the mixture test, a positive number on
// the scale of the difference of rates squared.
func (e *Settings) SetMixingVariance(v float64, o Origin) error {
	if !(v > 0) || math.IsInf(v, 1) {
		return o.errorf("%v: want a positive number (1e-4 is a spread of one percentage point)", v)
	}
	e.mixingVariance = v
	e.from["mixing_variance"] = o
	return nil
}

// parseMonitoring reads experiment.planned_units and
// experiment.mixing_variance.
func parseMonitoring(e *Settings, at func(string) Origin, fe fileExperiment) error {
	if err := setIf(fe.PlannedUnits, at("planned_units"), e.SetPlannedUnits); err != nil {
		return err
	}
	return setIf(fe.MixingVariance, at("mixing_variance"), e.SetMixingVariance)
}
