package experiment

import (
	"fmt"
	"math"
	"sort"
	"strings"
	"time"

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
	// arm (Unix nanoseconds); it orders arms not listed in the spec.
	FirstExposure int64
	// Metrics holds one Count per metric of the spec, in spec order.
	Metrics []Count
}

// Tally is the mergeable result of the event semantics for one experiment:
// counts only, no rows. Two tallies over disjoint sets of units (for
// example, hash partitions of the unit key) merge by summing.
type Tally struct {
	Arms []ArmTally
	// Freshness is the largest ts among valid rows (Unix nanoseconds);
	// HasFreshness is false when no row was read.
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

// unitState is the per-unit state of the tally: fixed size.
type unitState struct {
	t0       int64
	armAtT0  int32 // arm index of the earliest exposure; -1 when unexposed
	firstArm int32 // arm index of the first exposure row met in reading order
	tied     bool  // two arms at t0
	multi    bool  // two or more distinct arms among in-window exposures
}

type metricEvent struct {
	unit  int32
	event int32 // index into Tallier.metricNames
	ts    int64
}

// Tallier applies the event semantics of one Spec to record batches of the
// logical event table (see ColUser and friends) and produces a Tally.
// Memory grows with the number of distinct units that have an exposure or a
// metric event, and with the number of metric events; rows of other events
// are counted and dropped at once. A Tallier is not safe for concurrent use.
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
	units     map[string]int32
	state     []unitState
	events    []metricEvent
	armIndex  map[string]int32
	arms      []string
	armFirst  []int64
	expKeys   map[string]struct{}
	diag      TallyDiagnostics
	fresh     int64
	hasFresh  bool
}

const kindExposure = -1

// NewTallier validates spec and returns a Tallier for it.
func NewTallier(spec Spec) (*Tallier, error) {
	if spec.ExposureEvent == "" {
		return nil, fmt.Errorf("experiment %q: no exposure event name", spec.Key)
	}
	if len(spec.Metrics) == 0 {
		return nil, fmt.Errorf("experiment %q: no metrics", spec.Key)
	}
	if spec.Start != nil && spec.End != nil && !spec.Start.Before(*spec.End) {
		return nil, fmt.Errorf("experiment %q: window start %s is not before end %s",
			spec.Key, spec.Start.UTC().Format(time.RFC3339Nano), spec.End.UTC().Format(time.RFC3339Nano))
	}
	if len(spec.Split) != 0 && len(spec.Split) != len(spec.Arms) {
		return nil, fmt.Errorf("experiment %q: planned split has %d shares for %d arms", spec.Key, len(spec.Split), len(spec.Arms))
	}
	t := &Tallier{
		spec:      spec,
		eventKind: map[string]int32{spec.ExposureEvent: kindExposure},
		units:     make(map[string]int32),
		armIndex:  make(map[string]int32),
		expKeys:   make(map[string]struct{}),
	}
	seenMetric := make(map[string]bool)
	for mi, m := range spec.Metrics {
		if m.Name == "" {
			return nil, fmt.Errorf("experiment %q: metric %d has no name", spec.Key, mi+1)
		}
		if seenMetric[m.Name] {
			return nil, fmt.Errorf("experiment %q: metric %q defined twice", spec.Key, m.Name)
		}
		seenMetric[m.Name] = true
		if len(m.Events) == 0 {
			return nil, fmt.Errorf("experiment %q: metric %q has no events", spec.Key, m.Name)
		}
		if m.Window < 0 {
			return nil, fmt.Errorf("experiment %q: metric %q has a negative window", spec.Key, m.Name)
		}
		if m.Target != nil && !(*m.Target > 0 && *m.Target < 1) {
			return nil, fmt.Errorf("experiment %q: metric %q: target rate %v is not strictly between 0 and 1", spec.Key, m.Name, *m.Target)
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
	for _, a := range spec.Arms {
		if _, dup := t.armIndex[a]; dup {
			return nil, fmt.Errorf("experiment %q: arm %q listed twice", spec.Key, a)
		}
		t.addArm(a)
	}
	t.diag.OutsideAttribution = make([]int64, len(spec.Metrics))
	return t, nil
}

func (t *Tallier) addArm(name string) int32 {
	i := int32(len(t.arms))
	t.armIndex[name] = i
	t.arms = append(t.arms, name)
	t.armFirst = append(t.armFirst, math.MaxInt64)
	return i
}

func (t *Tallier) unit(user string) int32 {
	if u, ok := t.units[user]; ok {
		return u
	}
	u := int32(len(t.state))
	t.units[strings.Clone(user)] = u
	t.state = append(t.state, unitState{armAtT0: -1, firstArm: -1})
	return u
}

// stringColumn returns the named utf8 column, nil when absent.
func stringColumn(rec arrow.RecordBatch, name string, required bool) (*array.String, error) {
	idx := rec.Schema().FieldIndices(name)
	if len(idx) == 0 {
		if required {
			return nil, fmt.Errorf("event table has no %q column", name)
		}
		return nil, nil
	}
	col, ok := rec.Column(idx[0]).(*array.String)
	if !ok {
		return nil, fmt.Errorf("event table column %q is %s, want utf8", name, rec.Column(idx[0]).DataType())
	}
	return col, nil
}

// Add applies one record batch. It reads the user, ts, event, experiment and
// arm columns; it does not check the producer's row rules again (a null
// user reads as the empty string).
func (t *Tallier) Add(rec arrow.RecordBatch) error {
	users, err := stringColumn(rec, ColUser, true)
	if err != nil {
		return err
	}
	events, err := stringColumn(rec, ColEvent, true)
	if err != nil {
		return err
	}
	exps, err := stringColumn(rec, ColExperiment, false)
	if err != nil {
		return err
	}
	arms, err := stringColumn(rec, ColArm, false)
	if err != nil {
		return err
	}
	tsIdx := rec.Schema().FieldIndices(ColTS)
	if len(tsIdx) == 0 {
		return fmt.Errorf("event table has no %q column", ColTS)
	}
	tsCol, ok := rec.Column(tsIdx[0]).(*array.Timestamp)
	if !ok {
		return fmt.Errorf("event table column %q is %s, want timestamp", ColTS, rec.Column(tsIdx[0]).DataType())
	}
	if unit := tsCol.DataType().(*arrow.TimestampType).Unit; unit != arrow.Nanosecond {
		return fmt.Errorf("event table column %q has unit %s, want ns", ColTS, unit)
	}
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
			t.addExposure(users, exps, arms, i, at)
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

func (t *Tallier) addExposure(users, exps, arms *array.String, i int, at int64) {
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
	a, ok := t.armIndex[armName]
	if !ok {
		a = t.addArm(strings.Clone(armName))
	}
	if at < t.armFirst[a] {
		t.armFirst[a] = at
	}
	s := &t.state[t.unit(users.Value(i))]
	switch {
	case s.armAtT0 < 0 || at < s.t0:
		s.t0, s.armAtT0, s.tied = at, a, false
	case at == s.t0 && a != s.armAtT0:
		s.tied = true
	}
	if s.firstArm < 0 {
		s.firstArm = a
	} else if s.firstArm != a {
		s.multi = true
	}
}

// excluded reports whether the unit is left out of every metric, and why.
func (t *Tallier) excluded(s *unitState) bool {
	if s.multi && t.spec.MultiArm == MultiArmExclude {
		return true
	}
	return s.tied && t.spec.MultiArm == MultiArmFirst
}

// Tally finishes the pass: it decides each unit's arm, applies the
// multi-arm policy, attributes metric events, applies maturity and returns
// the counts. Arms are ordered as listed in the spec, then by their first
// in-window exposure time, then by name.
func (t *Tallier) Tally() (Tally, error) {
	if t.spec.Key == "" && len(t.expKeys) > 1 {
		keys := make([]string, 0, len(t.expKeys))
		for k := range t.expKeys {
			keys = append(keys, k)
		}
		sort.Strings(keys)
		return Tally{}, fmt.Errorf("exposure rows carry %d experiment keys (%s): choose one", len(keys), strings.Join(keys, ", "))
	}
	nm := len(t.spec.Metrics)
	// converted[u*nm+m] marks unit u converted on metric m.
	converted := make([]bool, len(t.state)*nm)
	d := t.diag
	d.OutsideAttribution = append([]int64(nil), t.diag.OutsideAttribution...)
	for _, e := range t.events {
		s := &t.state[e.unit]
		switch {
		case s.armAtT0 < 0:
			d.UnitNeverExposed++
			continue
		case t.excluded(s):
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
			converted[int(e.unit)*nm+m] = true
		}
	}

	// Order arms: spec arms first, then by first exposure, then name.
	order := make([]int32, len(t.arms))
	for i := range order {
		order[i] = int32(i)
	}
	ns := int32(len(t.spec.Arms))
	sort.SliceStable(order, func(i, j int) bool {
		a, b := order[i], order[j]
		if a < ns || b < ns {
			return a < b
		}
		if t.armFirst[a] != t.armFirst[b] {
			return t.armFirst[a] < t.armFirst[b]
		}
		return t.arms[a] < t.arms[b]
	})
	pos := make([]int, len(t.arms))
	out := Tally{Freshness: t.fresh, HasFreshness: t.hasFresh}
	for p, a := range order {
		pos[a] = p
		first := t.armFirst[a]
		if first == math.MaxInt64 {
			first = 0
		}
		out.Arms = append(out.Arms, ArmTally{Name: t.arms[a], FirstExposure: first, Metrics: make([]Count, nm)})
	}

	freshness := t.fresh
	for u := range t.state {
		s := &t.state[u]
		if s.armAtT0 < 0 {
			continue
		}
		d.UnitsExposed++
		arm := &out.Arms[pos[s.armAtT0]]
		arm.Exposed++
		if s.multi {
			d.MultiArmUnits++
		}
		if s.tied && t.spec.MultiArm == MultiArmFirst {
			d.TiedUnits++
		}
		if t.excluded(s) {
			continue
		}
		arm.Units++
		for m := range t.spec.Metrics {
			c := &arm.Metrics[m]
			if w := int64(t.spec.Metrics[m].Window); w > 0 {
				horizon := freshness
				if t.hasEnd {
					horizon = t.end
				}
				if s.t0 > horizon-w {
					c.Immature++
					if t.spec.Maturity == MaturityExclude {
						continue
					}
				}
			}
			c.Units++
			if converted[u*nm+m] {
				c.Conversions++
			}
		}
	}
	keys := make([]string, 0, len(t.expKeys))
	for k := range t.expKeys {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	d.ExperimentKeys = keys
	out.Diag = d
	return out, nil
}
