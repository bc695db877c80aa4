package specfile

import (
	"fmt"
	"strings"

	"github.com/armtally/armtally/experiment"
)

// ParseShape parses an input shape as input.shape and --input-shape give
// it: events (one row per event), units (one row per unit) or counts (one
// row per arm, segment values and metric).
func ParseShape(s string) (experiment.InputShape, error) {
	if shape, ok := shapeNames[s]; ok {
		return shape, nil
	}
	return 0, fmt.Errorf("%q: want events, units or counts", s)
}

// ShapeName returns the name input.shape and --input-shape give s.
func ShapeName(s experiment.InputShape) string { return shapeName(s) }

// SetShape sets the input shape the experiment is read from. Metrics set
// after it by flags are read for that shape (see Overrides); Build checks
// the metrics set before it.
func (e *Settings) SetShape(s experiment.InputShape, o Origin) {
	e.shape = s
	e.from["shape"] = o
}

// tableMetric turns a metric that a flag gave as NAME=EVENT into the
// metric of a unit or counts table: in a unit table the EVENT part names
// the metric's 0/1 column (NAME alone: the column NAME); a counts table
// names its metrics in its metric column, so only NAME is allowed. flag is
// the flag's name for the messages.
func tableMetric(ms *Metric, shape experiment.InputShape, flag, text string) error {
	events := ms.Metric.Events
	ms.Metric.Events = nil
	switch shape {
	case experiment.InputUnitTable:
		if len(events) != 1 {
			return flagErrorf("--%s %q: a unit table has one 0/1 column per metric: give NAME=COLUMN (or NAME, for the column NAME)", flag, text)
		}
		ms.Column = events[0]
	case experiment.InputCounts:
		if len(events) != 1 || events[0] != ms.Metric.Name {
			return flagErrorf("--%s %q: a counts table names each metric in its metric column: give the metric's NAME alone (with :WINDOW or a target if needed)", flag, text)
		}
	}
	return nil
}

// checkShape checks the metrics against the input shape when they came
// from one place (a spec file) and the shape from another (--input-shape):
// an event log needs each metric's events, and a table holds no events;
// only a unit table has metric columns.
func (e *Settings) checkShape() error {
	shapeFrom := e.originOf("shape")
	for _, ms := range e.metrics {
		switch {
		case e.shape == experiment.InputEventLog && len(ms.Metric.Events) == 0:
			return ms.From.errorf("metric %q has no events, and the input is an event log (input shape %q, from %s)",
				ms.Metric.Name, shapeName(e.shape), shapeFrom)
		case e.shape != experiment.InputEventLog && len(ms.Metric.Events) > 0:
			return ms.From.errorf("metric %q lists events (%s), which only an event log has; the input is a %s table (input shape %q, from %s)",
				ms.Metric.Name, strings.Join(ms.Metric.Events, ", "), tableWord(e.shape), shapeName(e.shape), shapeFrom)
		case e.shape != experiment.InputUnitTable && ms.Column != "":
			return ms.From.errorf("metric %q names a column (%s), which only a unit table has; the input shape is %q (from %s)",
				ms.Metric.Name, ms.Column, shapeName(e.shape), shapeFrom)
		}
	}
	return nil
}

// tableWord names the table of a shape: "unit" or "counts".
func tableWord(s experiment.InputShape) string {
	if s == experiment.InputUnitTable {
		return "unit"
	}
	return "counts"
}
