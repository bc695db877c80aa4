package experiment

import (
	"fmt"
	"iter"
	"sort"
	"strings"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
)

// Count is the sufficient statistic of one arm for one metric.
type Count struct {
	// Units is the number of units analysed for the metric (after the
	// multi-arm policy and, under MaturityExclude, without immature units).
	Units int64
	// Conversions is the number of those units that converted.
	Conversions int64
	// Immature is the number of units whose attribution window had not
	// closed by the maturity horizon. Under MaturityExclude they are left
	// out of Units; under MaturityInclude they are counted in Units too.
	Immature int64
}

// ArmTally holds one arm's counts.
type ArmTally struct {
	Name string
	// Exposed counts units whose first in-window exposure was in this arm,
	// before the multi-arm policy.
	Exposed int64
	// Units counts the arm's analysis population (after the multi-arm
	// policy, before maturity).
	Units int64
	// FirstExposure is the earliest in-window exposure time seen in this
	// arm (Unix nanoseconds) when HasFirstExposure; it orders arms not
	// listed in the spec. Counts and unit tables without exposure times
	// have none.
	FirstExposure    int64
	HasFirstExposure bool
	// Metrics holds one Count per metric of the spec, in spec order.
	Metrics []Count
	// Segments holds one entry per segment dimension of the spec, in spec
	// order; nil when the spec has none.
	Segments []SegmentCounts
}

// SegmentCounts is one arm's counts per value of one segment dimension.
type SegmentCounts struct {
	Dimension string
	// Values are sorted by CompareSegmentValues (null last). A tally made
	// by this package lists, in every arm, each value seen in any arm.
	Values []SegmentCell
}

// SegmentCell is one arm's counts for the units with one segment value.
type SegmentCell struct {
	Value SegmentValue
	// Units counts the arm's analysis population with this value (after
	// the multi-arm policy, before maturity).
	Units int64
	// Metrics holds one Count per metric of the spec, in spec order.
	Metrics []Count
}

// Tally is the mergeable result of the event semantics for one experiment:
// counts only, no rows. Two tallies over disjoint sets of units (for
// example, hash partitions of the unit key) merge by summing; MergeTallies
// says exactly when that is exact.
type Tally struct {
	// Input is the shape of the input the tally was made from.
	Input InputShape
	Arms  []ArmTally
	// Freshness is the largest ts among valid rows (Unix nanoseconds);
	// HasFreshness is false when no row was read, and for unit tables and
	// counts, which carry no conversion times.
	Freshness    int64
	HasFreshness bool
	Diag         TallyDiagnostics
}

// TallyDiagnostics are the counters the stages of the tally feed.
type TallyDiagnostics struct {
	RowsRead int64
	// ExposureRows counts rows of this experiment's exposure event (and key).
	ExposureRows int64
	// ExposuresOutsideWindow counts exposure rows outside [Start, End).
	ExposuresOutsideWindow int64
	// OtherExperimentRows counts exposure-event rows of other experiments.
	OtherExperimentRows int64
	// NotMetricEvents counts rows whose event is neither the exposure event
	// nor in any metric's event set.
	NotMetricEvents int64
	// MetricEvents counts rows whose event is in some metric's event set;
	// each is then exactly one of the next five or counted.
	MetricEvents       int64
	AfterWindowEnd     int64 // ts >= End
	UnitNeverExposed   int64 // unit has no in-window exposure
	UnitExcluded       int64 // unit excluded by the multi-arm policy or tied
	BeforeExposure     int64 // ts < t0
	MetricEventsInUnit int64 // at or after t0 for an analysed unit
	// OutsideAttribution counts, per metric, events of analysed units at or
	// after t0 + W (only metrics whose event set holds the event).
	OutsideAttribution []int64
	UnitsExposed       int64
	MultiArmUnits      int64
	TiedUnits          int64
	// ExperimentKeys lists the distinct experiment keys seen on exposure
	// rows, sorted (used to refuse an ambiguous run without a key).
	ExperimentKeys []string
}

type metricEvent struct {
	unit  int32
	event int32 // index into Tallier.metricNames
	ts    int64
}

// Tallier applies the event semantics of one Spec to record batches of the
// logical event table (see ColUser and friends) and produces a Tally, in
// two stages: first a UnitRecord per exposed unit (Units), then their sum
// (Tally, through an Accumulator). Memory grows with the number of
// distinct units that have an exposure or a metric event, and with the
// number of metric events; rows of other events are counted and dropped at
// once. A Tallier is not safe for concurrent use.
type Tallier struct {
	spec     Spec
	start    int64
	end      int64
	hasStart bool
	hasEnd   bool
	// eventKind maps an event name to its role: kindExposure, or an index
	// into metricNames (>= 0).
	eventKind   map[string]int32
	metricNames []string
	// metricsOf[i] lists the metric indices whose event set holds
	// metricNames[i].
	metricsOf [][]int
	exposures
	events   []metricEvent
	expKeys  map[string]struct{}
	diag     TallyDiagnostics
	fresh    int64
	hasFresh bool
	fin      *finished // the attribution of the events, until Add is called again
}

// finished is the result of attributing the metric events to units.
type finished struct {
	// converted[u*nm+m] marks unit u converted on metric m.
	converted []bool
	diag      TallyDiagnostics
}

const kindExposure = -1

// NewTallier validates spec and returns a Tallier for it.
func NewTallier(spec Spec) (*Tallier, error) {
	if spec.ExposureEvent == "" {
		return nil, fmt.Errorf("experiment %q: no exposure event name", spec.Key)
	}
	if err := spec.validate(ColUser, ColTS, ColEvent, ColExperiment, ColArm); err != nil {
		return nil, err
	}
	t := &Tallier{
		spec:      spec,
		eventKind: map[string]int32{spec.ExposureEvent: kindExposure},
		exposures: newExposures(spec),
		expKeys:   make(map[string]struct{}),
	}
	for mi, m := range spec.Metrics {
		if len(m.Events) == 0 {
			return nil, fmt.Errorf("experiment %q: metric %q has no events", spec.Key, m.Name)
		}
		for _, e := range m.Events {
			if e == spec.ExposureEvent {
				return nil, fmt.Errorf("experiment %q: metric %q counts the exposure event %q", spec.Key, m.Name, e)
			}
			k, ok := t.eventKind[e]
			if !ok {
				k = int32(len(t.metricNames))
				t.eventKind[e] = k
				t.metricNames = append(t.metricNames, e)
				t.metricsOf = append(t.metricsOf, nil)
			}
			if l := t.metricsOf[k]; len(l) == 0 || l[len(l)-1] != mi {
				t.metricsOf[k] = append(t.metricsOf[k], mi)
			}
		}
	}
	if spec.Start != nil {
		t.start, t.hasStart = spec.Start.UnixNano(), true
	}
	if spec.End != nil {
		t.end, t.hasEnd = spec.End.UnixNano(), true
	}
	t.diag.OutsideAttribution = make([]int64, len(spec.Metrics))
	return t, nil
}

// Add applies one record batch. It reads the user, ts, event, experiment
// and arm columns and the spec's segment columns (on exposure rows); it
// does not check the producer's row rules again (a null user reads as the
// empty string).
func (t *Tallier) Add(rec arrow.RecordBatch) error {
	const table = "event table"
	users, err := stringColumn(rec, table, ColUser, true)
	if err != nil {
		return err
	}
	events, err := stringColumn(rec, table, ColEvent, true)
	if err != nil {
		return err
	}
	exps, err := stringColumn(rec, table, ColExperiment, false)
	if err != nil {
		return err
	}
	arms, err := stringColumn(rec, table, ColArm, false)
	if err != nil {
		return err
	}
	segs, err := segmentColumns(rec, table, t.spec)
	if err != nil {
		return err
	}
	tsCol, err := timestampColumn(rec, table, ColTS, true)
	if err != nil {
		return err
	}
	t.fin = nil
	ts := tsCol.TimestampValues()
	n := int(rec.NumRows())
	t.diag.RowsRead += int64(n)
	for i := 0; i < n; i++ {
		at := int64(ts[i])
		if !t.hasFresh || at > t.fresh {
			t.fresh, t.hasFresh = at, true
		}
		kind, relevant := t.eventKind[events.Value(i)]
		if !relevant {
			t.diag.NotMetricEvents++
			continue
		}
		if kind == kindExposure {
			t.addExposure(users, exps, arms, segs, i, at)
			continue
		}
		t.diag.MetricEvents++
		if t.hasEnd && at >= t.end {
			t.diag.AfterWindowEnd++
			continue
		}
		u := t.unit(users.Value(i))
		t.events = append(t.events, metricEvent{unit: u, event: kind, ts: at})
	}
	return nil
}

// Events returns the event names whose rows the tallier uses: the
// exposure event, then the metrics' events in spec order. A reader may
// leave out the rows of every other event and report them through
// AddFiltered instead: the tally is the same.
func (t *Tallier) Events() []string {
	return append([]string{t.spec.ExposureEvent}, t.metricNames...)
}

// AddFiltered accounts for the given number of valid rows that a reader left out because
// their event is not among Events, the largest of whose ts is maxTS (Unix
// nanoseconds): they count as rows read and as rows of other events, and
// their times move the data's freshness (the maturity horizon when the spec
// has no end), exactly as if Add had seen them.
func (t *Tallier) AddFiltered(rows, maxTS int64) {
	if rows <= 0 {
		return
	}
	t.fin = nil
	t.diag.RowsRead += rows
	t.diag.NotMetricEvents += rows
	if !t.hasFresh || maxTS > t.fresh {
		t.fresh, t.hasFresh = maxTS, true
	}
}

func (t *Tallier) addExposure(users, exps, arms *array.String, segs []*array.String, i int, at int64) {
	if exps != nil {
		key := ""
		if exps.IsValid(i) {
			key = exps.Value(i)
		}
		if t.spec.Key == "" {
			if _, ok := t.expKeys[key]; !ok {
				t.expKeys[strings.Clone(key)] = struct{}{}
			}
		} else if key != t.spec.Key {
			t.diag.OtherExperimentRows++
			return
		}
	}
	t.diag.ExposureRows++
	if (t.hasStart && at < t.start) || (t.hasEnd && at >= t.end) {
		t.diag.ExposuresOutsideWindow++
		return
	}
	armName := ""
	if arms != nil && arms.IsValid(i) {
		armName = arms.Value(i)
	}
	t.expose(t.unit(users.Value(i)), t.arm(armName), at, segs, i)
}

// checkKeys refuses a run without an experiment key over exposures of
// several experiments.
func (t *Tallier) checkKeys() error {
	if t.spec.Key == "" && len(t.expKeys) > 1 {
		keys := t.experimentKeys()
		return fmt.Errorf("exposure rows carry %d experiment keys (%s): choose one", len(keys), strings.Join(keys, ", "))
	}
	return nil
}

func (t *Tallier) experimentKeys() []string {
	keys := make([]string, 0, len(t.expKeys))
	for k := range t.expKeys {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	return keys
}

// finish attributes the metric events to the units: each event is ignored
// (unit never exposed, unit excluded by the multi-arm policy, before t0,
// outside the attribution window) or marks its unit converted.
func (t *Tallier) finish() *finished {
	if t.fin != nil {
		return t.fin
	}
	nm := len(t.spec.Metrics)
	f := &finished{converted: make([]bool, len(t.state)*nm), diag: t.diag}
	d := &f.diag
	d.OutsideAttribution = append([]int64(nil), t.diag.OutsideAttribution...)
	for _, e := range t.events {
		s := &t.state[e.unit]
		switch {
		case s.armAtT0 < 0:
			d.UnitNeverExposed++
			continue
		case status(s, t.spec.MultiArm) != StatusAnalysed:
			d.UnitExcluded++
			continue
		case e.ts < s.t0:
			d.BeforeExposure++
			continue
		}
		d.MetricEventsInUnit++
		for _, m := range t.metricsOf[e.event] {
			w := int64(t.spec.Metrics[m].Window)
			if w > 0 && e.ts-s.t0 >= w {
				d.OutsideAttribution[m]++
				continue
			}
			f.converted[int(e.unit)*nm+m] = true
		}
	}
	t.fin = f
	return f
}

// record fills rec for exposed unit u (its key only when withKey).
func (t *Tallier) record(f *finished, u int32, withKey bool, rec *UnitRecord) {
	t.fill(u, t.spec.MultiArm, true, withKey, rec)
	nm := len(t.spec.Metrics)
	if len(rec.Converted) != nm {
		rec.Converted, rec.Immature = make([]bool, nm), make([]bool, nm)
	}
	horizon := t.fresh
	if t.hasEnd {
		horizon = t.end
	}
	analysed := rec.Status == StatusAnalysed
	for m, mt := range t.spec.Metrics {
		w := int64(mt.Window)
		rec.Converted[m] = analysed && f.converted[int(u)*nm+m]
		rec.Immature[m] = analysed && w > 0 && t.state[u].t0 > horizon-w
	}
}

// Units returns the first stage of the tally: one record per unit with an
// in-window exposure, sorted by unit key (bytewise). Each record yielded
// is fresh: the caller may keep it. Call it after the last Add; it fails
// like Tally when a run without an experiment key meets several keys.
func (t *Tallier) Units() (iter.Seq[UnitRecord], error) {
	if err := t.checkKeys(); err != nil {
		return nil, err
	}
	f := t.finish()
	order := t.sortedUnits()
	return func(yield func(UnitRecord) bool) {
		for _, u := range order {
			var rec UnitRecord
			t.record(f, u, true, &rec)
			if !yield(rec) {
				return
			}
		}
	}, nil
}

// Tally finishes the pass: it decides each unit's arm, applies the
// multi-arm policy, attributes metric events, applies maturity and returns
// the counts, overall and per segment value. Arms are ordered as listed in
// the spec, then by their first in-window exposure time, then by name.
// Tally may be called again after more Adds.
func (t *Tallier) Tally() (Tally, error) {
	if err := t.checkKeys(); err != nil {
		return Tally{}, err
	}
	f := t.finish()
	acc, err := NewAccumulator(t.spec)
	if err != nil {
		return Tally{}, err
	}
	t.seeArms(acc)
	var rec UnitRecord
	for u := range t.state {
		if t.state[u].armAtT0 < 0 {
			continue
		}
		t.record(f, int32(u), false, &rec)
		if err := acc.Add(rec); err != nil {
			return Tally{}, err
		}
	}
	out := acc.Tally()
	d := f.diag
	d.UnitsExposed, d.MultiArmUnits, d.TiedUnits = out.Diag.UnitsExposed, out.Diag.MultiArmUnits, out.Diag.TiedUnits
	d.ExperimentKeys = t.experimentKeys()
	out.Diag = d
	out.Input = InputEventLog
	out.Freshness, out.HasFreshness = t.fresh, t.hasFresh
	return out, nil
}
