package specfile

import (
	"fmt"
	"slices"

	"github.com/armtally/armtally/experiment"
)

// Role is a metric's role in the readout (experiment.metric.role).
type Role int

const (
	// Primary metrics form the family of comparisons that decide, and come
	// first. It is the zero value and the default.
	Primary Role = iota
	// Secondary metrics are compared too, after the primary ones.
	Secondary
	// Guardrail metrics must not get worse: each has a non-inferiority
	// margin.
	Guardrail
)

var roleNames = []string{"primary", "secondary", "guardrail"}

// String returns the role's name as a spec file spells it.
func (r Role) String() string {
	if r >= 0 && int(r) < len(roleNames) {
		return roleNames[r]
	}
	return fmt.Sprintf("Role(%d)", int(r))
}

// parseRole parses "primary", "secondary" or "guardrail".
func parseRole(s string) (Role, bool) {
	for i, name := range roleNames {
		if s == name {
			return Role(i), true
		}
	}
	return 0, false
}

// parseMetric checks one [[experiment.metric]] table at path p.
func (sf *File) parseMetric(l *locator, p string, fm fileMetric, exposure string) (Metric, error) {
	at := func(key string) Origin { return l.at(p + "." + key) }
	ms := Metric{From: at("name"), Role: Primary}
	if fm.Name == nil || *fm.Name == "" {
		return ms, l.at(p).errorf("a metric needs a name (%s.name)", p)
	}
	m := &ms.Metric
	m.Name = *fm.Name
	if err := sf.parseEvents(l, p, fm, exposure, m); err != nil {
		return ms, err
	}
	if fm.Window != nil {
		w, err := ParseWindow(*fm.Window)
		if err != nil {
			return ms, at("window").errorf("%v", err)
		}
		m.Window = w
	}
	if fm.Role != nil {
		role, ok := parseRole(*fm.Role)
		if !ok {
			return ms, at("role").errorf("%q: want primary, secondary or guardrail", *fm.Role)
		}
		ms.Role = role
	}
	if fm.Better != nil {
		switch *fm.Better {
		case "higher":
		case "lower":
			m.LowerIsBetter = true
		default:
			return ms, at("better").errorf("%q: want higher or lower", *fm.Better)
		}
	}
	if err := parseMarginKey(at, p, fm, &ms); err != nil {
		return ms, err
	}
	if fm.Sequential != nil {
		if err := parseSequential(at, *fm.Sequential, &ms); err != nil {
			return ms, err
		}
	}
	if fm.Target != nil {
		v, err := fileTarget(fm.Target)
		if err != nil {
			return ms, at("target").errorf("%v", err)
		}
		m.Target = &v
	}
	if fm.Column != nil {
		if sf.Shape != experiment.InputUnitTable {
			return ms, at("column").errorf("is for input.shape = \"units\" (the shape is %q)", shapeName(sf.Shape))
		}
		if *fm.Column == "" {
			return ms, at("column").errorf("empty column name")
		}
		ms.Column = *fm.Column
	}
	return ms, nil
}

// parseEvents reads the events of the metric table at path p into m.
func (sf *File) parseEvents(l *locator, p string, fm fileMetric, exposure string, m *experiment.Metric) error {
	at := func(key string) Origin { return l.at(p + "." + key) }
	if sf.Shape == experiment.InputEventLog && fm.Events == nil {
		return l.at(p).errorf("metric %q needs its events (%s.events)", m.Name, p)
	}
	if fm.Events != nil && sf.Shape != experiment.InputEventLog {
		return at("events").errorf("events are for input.shape = \"events\"; a %s table holds the conversions already", shapeName(sf.Shape))
	}
	if fm.Events != nil && len(fm.Events) == 0 {
		return at("events").errorf("metric %q: empty list of events", m.Name)
	}
	seen := map[string]bool{}
	for j, ev := range fm.Events {
		o := at(fmt.Sprintf("events[%d]", j))
		switch {
		case ev == "" || seen[ev]:
			return o.errorf("%q: empty or repeated event name", ev)
		case ev == exposure:
			return o.errorf("%q is the experiment's exposure event, not a conversion", ev)
		}
		seen[ev] = true
		m.Events = append(m.Events, ev)
	}
	return nil
}

// parseMarginKey checks the margin against the role and reads it.
func parseMarginKey(at func(string) Origin, p string, fm fileMetric, ms *Metric) error {
	switch {
	case fm.Margin != nil && ms.Role != Guardrail:
		return at("margin").errorf("a margin is only for guardrail metrics, and metric %q has role %q (set role = \"guardrail\" or remove the margin)", ms.Metric.Name, ms.Role)
	case fm.Margin == nil && ms.Role == Guardrail:
		return at("role").errorf("guardrail metric %q needs a non-inferiority margin (%s.margin, such as \"0.5pp\" or \"5%%\")", ms.Metric.Name, p)
	case fm.Margin != nil:
		g, err := ParseMargin(*fm.Margin)
		if err != nil {
			return at("margin").errorf("%v", err)
		}
		ms.Metric.Guardrail = &g
	}
	return nil
}

// fileTarget reads a target rate: a number strictly between 0 and 1 or a
// string ParseRate reads.
func fileTarget(v any) (float64, error) {
	switch t := v.(type) {
	case float64:
		if !(t > 0 && t < 1) {
			return 0, fmt.Errorf("%v is not strictly between 0 and 1", t)
		}
		return t, nil
	case int64:
		return 0, fmt.Errorf("%d is not strictly between 0 and 1 (write a share such as 0.12 or a string such as \"12%%\")", t)
	case string:
		return ParseRate(t)
	}
	return 0, fmt.Errorf("wrong type: want a number or a string (the file has %s)", tomlKind(v))
}

// sequentialMethods are the values of experiment.metric.sequential, as
// the --sequential flag spells them: O'Brien-Fleming-type and Pocock-type
// alpha spending, the mixture test, and fixed (no sequential test).
var sequentialMethods = []string{"obf", "pocock", "mixture", "fixed"}

// parseSequential checks a metric's sequential method against its role.
func parseSequential(at func(string) Origin, v string, ms *Metric) error {
	if !slices.Contains(sequentialMethods, v) {
		return at("sequential").errorf("%q: want obf, pocock, mixture or fixed", v)
	}
	if ms.Role == Guardrail {
		return at("sequential").errorf("guardrail metric %q is tested for non-inferiority at every look, never sequentially (remove the key)", ms.Metric.Name)
	}
	ms.Sequential, ms.SequentialFrom = v, at("sequential")
	return nil
}
