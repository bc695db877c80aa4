package warehouse

import (
	"fmt"
	"slices"
	"time"

	"github.com/armtally/armtally/experiment"
)

// Row is one row of the query's result, scanned by position: Targets
// gives the pointers a database driver's Scan fills (NULL leaves a
// pointer nil).
type Row struct {
	Experiment *string
	Kind       string
	Name       *string
	Arm        *string
	Segments   []*string // one per Query.ResultColumns segment column
	Metric     *string
	Units      *int64
	Conv       *int64
	Immature   *int64
	At         *time.Time
}

// NewRow returns a Row with room for the query's segment columns.
func (q *Query) NewRow() *Row { return &Row{Segments: make([]*string, len(q.segments))} }

// Targets returns the scan destinations of the row's columns, in
// ResultColumns order.
func (r *Row) Targets() []any {
	t := []any{&r.Experiment, &r.Kind, &r.Name, &r.Arm}
	for i := range r.Segments {
		t = append(t, &r.Segments[i])
	}
	return append(t, &r.Metric, &r.Units, &r.Conv, &r.Immature, &r.At)
}

// Input is what the result says about the whole table, for the
// readout's diagnostics (experiment.AnalysisOptions.RowsRead and
// BadRows).
type Input struct {
	// RowsRead counts every row of the table, bad ones included.
	RowsRead int64
	// BadRows counts the bad rows by reason, in the order the file
	// reader lists them, leaving out reasons with none.
	BadRows []experiment.ReasonCount
}

// decoder gathers the rows of one experiment.
type decoder struct {
	spec    experiment.Spec
	metric  map[string]int
	arms    map[string]*experiment.ArmTally
	order   []string
	counter map[string]int64
	outside []int64
}

// Decode turns the rows of the query's result into one tally per
// experiment (in the definition's order) and the table's counters. The
// tallies are those experiment.Tallier makes of the same rows read from
// files: counts per arm, metric and segment value, the arms' first
// exposures, the diagnostics and the data's freshness.
func (q *Query) Decode(rows []*Row) ([]experiment.Tally, Input, error) {
	decs := make([]*decoder, len(q.def.Experiments))
	byKey := map[string]*decoder{}
	for i, s := range q.def.Experiments {
		d := &decoder{spec: s, metric: map[string]int{}, arms: map[string]*experiment.ArmTally{}, counter: map[string]int64{}, outside: make([]int64, len(s.Metrics))}
		for m, mt := range s.Metrics {
			d.metric[mt.Name] = m
		}
		for _, a := range s.Arms {
			d.arm(a)
		}
		decs[i], byKey[s.Key] = d, d
	}
	input := map[string]int64{}
	var keys []string
	var fresh *time.Time
	for i, r := range rows {
		if r.Kind == KindInput || r.Kind == KindKey {
			switch {
			case r.Kind == KindKey && r.Name != nil:
				keys = append(keys, *r.Name)
			case r.Name != nil && *r.Name == InputFreshness:
				fresh = r.At
			case r.Name != nil:
				input[*r.Name] = value(r.Units)
			}
			continue
		}
		if r.Experiment == nil || byKey[*r.Experiment] == nil {
			return nil, Input{}, fmt.Errorf("result row %d: no experiment of the definition", i+1)
		}
		if err := byKey[*r.Experiment].add(q, r); err != nil {
			return nil, Input{}, fmt.Errorf("result row %d: experiment %q: %w", i+1, *r.Experiment, err)
		}
	}
	slices.Sort(keys)
	in := Input{RowsRead: input[InputRowsRead]}
	for _, reason := range badReasons {
		if n := input[reason]; n > 0 {
			in.BadRows = append(in.BadRows, experiment.ReasonCount{Reason: reason, Count: n})
		}
	}
	out := make([]experiment.Tally, len(decs))
	for i, d := range decs {
		t, err := d.tally(q, input, keys, fresh)
		if err != nil {
			return nil, Input{}, fmt.Errorf("experiment %q: %w", d.spec.Key, err)
		}
		out[i] = t
	}
	return out, in, nil
}

func value(p *int64) int64 {
	if p == nil {
		return 0
	}
	return *p
}

// arm returns the named arm's tally, added when new.
func (d *decoder) arm(name string) *experiment.ArmTally {
	a := d.arms[name]
	if a == nil {
		a = &experiment.ArmTally{Name: name, Metrics: make([]experiment.Count, len(d.spec.Metrics))}
		if n := len(d.spec.Segments); n > 0 {
			a.Segments = make([]experiment.SegmentCounts, n)
			for i, dim := range d.spec.Segments {
				a.Segments[i].Dimension = dim
			}
		}
		d.arms[name] = a
		d.order = append(d.order, name)
	}
	return a
}

// add applies one row of the experiment.
func (d *decoder) add(q *Query, r *Row) error {
	switch r.Kind {
	case KindArm:
		if r.Arm == nil {
			return fmt.Errorf("arm row without an arm")
		}
		a := d.arm(*r.Arm)
		a.Exposed, a.Units = value(r.Units), value(r.Conv)
		if r.At != nil {
			a.FirstExposure, a.HasFirstExposure = r.At.UnixNano(), true
		}
	case KindCounter:
		if r.Name == nil {
			return fmt.Errorf("counter row without a name")
		}
		if *r.Name == CounterOutsideAttribution {
			m, ok := d.metric[deref(r.Metric)]
			if !ok {
				return fmt.Errorf("counter row of unknown metric %q", deref(r.Metric))
			}
			d.outside[m] = value(r.Units)
			return nil
		}
		d.counter[*r.Name] = value(r.Units)
	case KindCount:
		return d.addCount(q, r)
	default:
		return fmt.Errorf("unknown row kind %q", r.Kind)
	}
	return nil
}

func deref(p *string) string {
	if p == nil {
		return ""
	}
	return *p
}

// addCount adds a cell of the counts shape to its arm's metric and to
// the cell of each of its segment values.
func (d *decoder) addCount(q *Query, r *Row) error {
	m, ok := d.metric[deref(r.Metric)]
	if r.Arm == nil || !ok {
		return fmt.Errorf("count row without an arm or with unknown metric %q", deref(r.Metric))
	}
	c := experiment.Count{Units: value(r.Units), Conversions: value(r.Conv), Immature: value(r.Immature)}
	a := d.arm(*r.Arm)
	addTo(&a.Metrics[m], c)
	pop := c.Units
	if d.spec.Maturity == experiment.MaturityExclude {
		pop += c.Immature
	}
	idx := q.segmentIndexes(d.spec)
	for di := range d.spec.Segments {
		v := experiment.SegmentValue{}
		if p := r.Segments[idx[di]]; p != nil {
			v = experiment.SegmentValue{Value: *p, Valid: true}
		}
		sc := &a.Segments[di]
		j := slices.IndexFunc(sc.Values, func(c experiment.SegmentCell) bool { return c.Value == v })
		if j < 0 {
			sc.Values = append(sc.Values, experiment.SegmentCell{Value: v, Metrics: make([]experiment.Count, len(d.spec.Metrics))})
			j = len(sc.Values) - 1
		}
		cell := &sc.Values[j]
		if m == 0 {
			// Every metric counts the same units; the first says how many.
			cell.Units += pop
		}
		addTo(&cell.Metrics[m], c)
	}
	return nil
}

func addTo(dst *experiment.Count, c experiment.Count) {
	dst.Units += c.Units
	dst.Conversions += c.Conversions
	dst.Immature += c.Immature
}

// tally assembles the experiment's tally; experiment.MergeTallies of the
// one part orders the arms and segment values as a tallier does and
// refuses an experiment without a key over several keys.
func (d *decoder) tally(q *Query, input map[string]int64, keys []string, fresh *time.Time) (experiment.Tally, error) {
	c := d.counter
	t := experiment.Tally{Input: experiment.InputEventLog, Diag: experiment.TallyDiagnostics{
		RowsRead:               input[InputValidRows],
		ExposureRows:           c[CounterExposureRows],
		ExposuresOutsideWindow: c[CounterOutsideWindow],
		OtherExperimentRows:    c[CounterOtherExperiment],
		NotMetricEvents:        input[InputValidRows] - input[InputExposureEventRows] - c[CounterMetricEvents],
		MetricEvents:           c[CounterMetricEvents],
		AfterWindowEnd:         c[CounterAfterWindowEnd],
		UnitNeverExposed:       c[CounterUnitNeverExposed],
		UnitExcluded:           c[CounterUnitExcluded],
		BeforeExposure:         c[CounterBeforeExposure],
		MetricEventsInUnit:     c[CounterInUnit],
		OutsideAttribution:     d.outside,
		UnitsExposed:           c[CounterUnitsExposed],
		MultiArmUnits:          c[CounterMultiArm],
		TiedUnits:              c[CounterTied],
	}}
	if d.spec.Key == "" && q.def.Columns.Experiment != "" {
		t.Diag.ExperimentKeys = keys
	}
	if fresh != nil {
		t.Freshness, t.HasFreshness = fresh.UnixNano(), true
	}
	for _, name := range d.order {
		t.Arms = append(t.Arms, *d.arms[name])
	}
	return experiment.MergeTallies(d.spec, t)
}
