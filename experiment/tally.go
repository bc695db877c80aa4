package experiment

import (
	"bytes"
	"errors"
	"fmt"
	"hash/maphash"
	"iter"
	"math"
	"runtime"
	"slices"
	"sort"
	"strings"
	"sync"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
	"github.com/armtally/armtally/experiment/hugepage"
	"github.com/zeebo/xxh3"
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
	MetricEvents   int64
	AfterWindowEnd int64 // ts >= End
	// AfterAsOf counts rows at or after Spec.AsOf, of any event: they
	// did not exist yet at the look being rerun.
	AfterAsOf          int64
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
//
// Inside, the units are split by a hash of their key into partitions that
// share nothing (the tally of a unit depends on that unit's rows only), and
// Add hands each partition's rows to its own goroutine: the per-unit work
// runs on all cores. Each Add first makes one pass over the batch that
// decides each row's role and hashes its unit.
type Tallier struct {
	spec     Spec
	start    int64
	end      int64
	hasStart bool
	hasEnd   bool
	asOf     int64
	hasAsOf  bool
	// names and kinds give each used event name its role: kindExposure,
	// or an index into metricNames (>= 0).
	names       []string
	kinds       []int32
	metricNames []string
	// metricsOf[i] lists the metric indices whose event set holds
	// metricNames[i].
	metricsOf [][]int
	seed      maphash.Seed
	parts     []*tallyPart
	// saved is the saved state a resumed tally merges (tallystate.go);
	// stateHash is the stable hash that orders a saved state's units.
	saved     *savedState
	stateHash func([]byte) uint64
	// armIndex and arms intern the arm names; every partition's
	// exposures lists the same arms in the same order.
	armIndex map[string]int32
	arms     []string
	expKeys  map[string]struct{}
	diag     TallyDiagnostics
	fresh    int64
	hasFresh bool
	fin      *finished // the attribution of the events, until Add is called again

	// Per batch, of each row the first pass keeps (partRows): its role
	// (kindExposure with its arm in rowArm, or a metric event index) and
	// its key's hash.
	rowKind []int32
	rowArm  []int32
	rowHash []uint64
	// partRows[p] lists the batch's kept rows of partition p, in order.
	partRows [][]int32
	// Per batch, of a dictionary-encoded event, experiment or arm column
	// (textColumn): each dictionary value's role (kindMemo: kind, or
	// kindUnknown or kindOther), whether it is this experiment's key
	// (expMemo: 0 unknown, 1 yes, 2 no) and its arm (armMemo, -1
	// unknown).
	kindMemo []int32
	expMemo  []uint8
	armMemo  []int32

	// metricRows[i] counts the rows of event metricNames[i] (see
	// MetricEventRows).
	metricRows []int64
}

// tallyPart is one hash partition of the units.
type tallyPart struct {
	exposures
	events chunked[metricEvent]
	sink   uint64 // see unitIndex.slotOf
}

// finished is the result of attributing the metric events to units.
type finished struct {
	// converted[p][u*nm+m] marks unit u of partition p converted on
	// metric m.
	converted [][]bool
	diag      TallyDiagnostics
	// stale is a resumed tally that cannot be exact (*StaleStateError).
	stale error
	// merged is a resumed tally's merge with its saved state
	// (tallystate.go); converted is then unused.
	merged *mergeResult
}

// kindExposure is the role of an exposure row (rowKind); a metric event
// row's role is the event's index into metricNames.
const kindExposure = -1

// smallArms is the most arms looked up by a linear scan of their names,
// which beats a map's hashing when there are few; more use the map.
const smallArms = 8

// NewTallier validates spec and returns a Tallier for it, with one
// partition per core (runtime.GOMAXPROCS).
func NewTallier(spec Spec) (*Tallier, error) {
	return newTallier(spec, runtime.GOMAXPROCS(0))
}

// newTallier returns a Tallier with the given number of partitions (1 to
// 256); the tally does not depend on it.
func newTallier(spec Spec, partitions int) (*Tallier, error) {
	if spec.ExposureEvent == "" {
		return nil, fmt.Errorf("experiment %q: no exposure event name", spec.Key)
	}
	if err := spec.validate(ColUser, ColTS, ColEvent, ColExperiment, ColArm); err != nil {
		return nil, err
	}
	partitions = max(1, min(partitions, 256))
	t := &Tallier{
		spec:      spec,
		names:     []string{spec.ExposureEvent},
		kinds:     []int32{kindExposure},
		seed:      maphash.MakeSeed(),
		stateHash: xxh3.Hash,
		armIndex:  make(map[string]int32),
		expKeys:   make(map[string]struct{}),
	}
	for range partitions {
		pt := &tallyPart{exposures: newExposures(spec)}
		pt.units = newUnitIndexSeed(t.seed)
		t.parts = append(t.parts, pt)
	}
	for _, a := range spec.Arms {
		t.arm(a)
	}
	for mi, m := range spec.Metrics {
		if len(m.Events) == 0 {
			return nil, fmt.Errorf("experiment %q: metric %q has no events", spec.Key, m.Name)
		}
		for _, e := range m.Events {
			if e == spec.ExposureEvent {
				return nil, fmt.Errorf("experiment %q: metric %q counts the exposure event %q", spec.Key, m.Name, e)
			}
			k, ok := t.kind(e)
			if !ok {
				k = int32(len(t.metricNames))
				t.names = append(t.names, e)
				t.kinds = append(t.kinds, k)
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
	if spec.AsOf != nil {
		t.asOf, t.hasAsOf = spec.AsOf.UnixNano(), true
	}
	t.diag.OutsideAttribution = make([]int64, len(spec.Metrics))
	t.metricRows = make([]int64, len(t.metricNames))
	return t, nil
}

// kind returns the role of an event name. The names are few: a linear
// scan beats a map's hashing.
func (t *Tallier) kind(name string) (int32, bool) {
	for i, n := range t.names {
		if n == name {
			return t.kinds[i], true
		}
	}
	return 0, false
}

// arm returns the index of the named arm, adding it to every partition
// when new.
func (t *Tallier) arm(name string) int32 {
	if len(t.arms) <= smallArms {
		for i, a := range t.arms {
			if a == name {
				return int32(i)
			}
		}
	} else if a, ok := t.armIndex[name]; ok {
		return a
	}
	name = strings.Clone(name)
	a := int32(len(t.arms))
	t.armIndex[name] = a
	t.arms = append(t.arms, name)
	for _, pt := range t.parts {
		pt.arm(name)
	}
	return a
}

// partOf returns the partition of a key's hash, from its top bits, which
// the unit index does not use: their share of 1<<32 scaled to the number
// of partitions (a multiplication and a shift, where a remainder would
// take a division per row).
func (t *Tallier) partOf(h uint64) int {
	return int((h >> 32) * uint64(len(t.parts)) >> 32)
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
	events, err := textColumnOf(rec, table, ColEvent, true)
	if err != nil {
		return err
	}
	exps, err := textColumnOf(rec, table, ColExperiment, false)
	if err != nil {
		return err
	}
	arms, err := textColumnOf(rec, table, ColArm, false)
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
	t.rowKind = slices.Grow(t.rowKind[:0], n)[:n]
	t.rowArm = slices.Grow(t.rowArm[:0], n)[:n]
	t.rowHash = slices.Grow(t.rowHash[:0], n)[:n]
	if len(t.partRows) != len(t.parts) {
		t.partRows = make([][]int32, len(t.parts))
	}
	for p := range t.partRows {
		t.partRows[p] = t.partRows[p][:0]
	}
	// Of a dictionary column, each value's role is decided at its first
	// row: see eventKind, ofExperiment and armOf.
	t.kindMemo = memo(&events, t.kindMemo, kindUnknown)
	t.expMemo = memo(&exps, t.expMemo, 0)
	t.armMemo = memo(&arms, t.armMemo, -1)
	// The first pass: the rules that do not depend on the unit.
	for i := 0; i < n; i++ {
		at := int64(ts[i])
		if t.hasAsOf && at >= t.asOf {
			t.diag.AfterAsOf++
			continue
		}
		if !t.hasFresh || at > t.fresh {
			t.fresh, t.hasFresh = at, true
		}
		kind, relevant := t.eventKind(&events, i)
		if !relevant {
			t.diag.NotMetricEvents++
			continue
		}
		if kind == kindExposure {
			a, ok := t.exposureArm(&exps, &arms, i, at)
			if !ok {
				continue
			}
			t.rowArm[i] = a
		} else {
			t.diag.MetricEvents++
			t.metricRows[kind]++
			if t.hasEnd && at >= t.end {
				t.diag.AfterWindowEnd++
				continue
			}
		}
		t.rowKind[i] = kind
		h := maphash.String(t.seed, users.Value(i))
		t.rowHash[i] = h
		p := t.partOf(h)
		t.partRows[p] = append(t.partRows[p], int32(i))
	}
	if len(t.arms) > maxArms {
		return fmt.Errorf("%s: more than %d distinct arm names", table, maxArms)
	}
	kept := 0
	for _, rows := range t.partRows {
		kept += len(rows)
	}
	if kept == 0 {
		return nil
	}
	// The second: each partition's rows, on its own goroutine.
	if len(t.parts) == 1 {
		t.addPart(0, users, ts, segs)
	} else {
		var wg sync.WaitGroup
		for p := range t.parts {
			wg.Go(func() { t.addPart(p, users, ts, segs) })
		}
		wg.Wait()
	}
	if len(segs) > 0 {
		for _, pt := range t.parts {
			if err := pt.segmentLimit(t.spec); err != nil {
				return err
			}
		}
	}
	return nil
}

// addPart applies the rows of partition p that the first pass kept
// (t.partRows[p]).
//
// The rows go in groups: the unit index's memory for a whole group is
// read first (unitIndex.slotOf, unitOf and keyTouch, in two stages), so
// that the cache misses of the group overlap, then the group is applied
// in order. The first stage has no branch that depends on the data, so
// that nothing the processor guessed wrong cancels its loads.
func (t *Tallier) addPart(p int, users *array.String, ts []arrow.Timestamp, segs []*array.String) {
	const group = 32
	pt := t.parts[p]
	var slots [group]uint64
	var sink uint64
	all := t.partRows[p]
	for len(all) > 0 {
		rows := all[:min(group, len(all))]
		all = all[len(rows):]
		// The group's slots first, then the units they name (their key
		// ends and, for an exposure, first exposures): within a stage no
		// load waits on another.
		for j, r := range rows {
			slots[j] = pt.units.slotOf(t.rowHash[r])
		}
		for j, r := range rows {
			if u := pt.units.unitOf(slots[j], t.rowHash[r]); u >= 0 {
				sink += pt.units.keyTouch(u)
				if t.rowKind[r] == kindExposure {
					sink += uint64(pt.state.at(int(u)).t0)
				}
			}
		}
		for _, r := range rows {
			i := int(r)
			u := pt.unitHashed(users.Value(i), t.rowHash[i])
			if kind := t.rowKind[i]; kind == kindExposure {
				pt.expose(u, t.rowArm[i], int64(ts[i]), segs, i)
			} else {
				pt.events.add(metricEvent{unit: u, event: kind, ts: int64(ts[i])})
			}
		}
	}
	pt.sink += sink
}

// SetReadShare tells the tallier the share (0 to 1) of its input that the
// batches added so far hold, such as a reader's rows read over the rows
// its files' metadata lists. A unit index that must grow then grows toward
// the units the share projects, in one step rather than several doublings
// (unitIndex.grow). It is advice: the tally does not depend on it. A
// share outside (0, 1) turns it off.
func (t *Tallier) SetReadShare(share float64) {
	if !(share > 0 && share < 1) {
		share = 0
	}
	for _, pt := range t.parts {
		pt.units.share = share
	}
}

// exposureArm applies the rules of an exposure row that do not depend on
// the unit: its experiment key and the window. It returns the row's arm,
// or false when the row is not an in-window exposure of this experiment.
func (t *Tallier) exposureArm(exps, arms *textColumn, i int, at int64) (int32, bool) {
	if exps.arr != nil && !t.ofExperiment(exps, i) {
		t.diag.OtherExperimentRows++
		return 0, false
	}
	t.diag.ExposureRows++
	if (t.hasStart && at < t.start) || (t.hasEnd && at >= t.end) {
		t.diag.ExposuresOutsideWindow++
		return 0, false
	}
	return t.armOf(arms, i), true
}

// kindUnknown marks a dictionary value whose role is not decided yet
// (kindMemo); kindOther one that is no event of the tally.
const (
	kindUnknown = -3
	kindOther   = -4
)

// eventKind returns the role of row i's event (see kind).
func (t *Tallier) eventKind(events *textColumn, i int) (int32, bool) {
	if events.idx == nil || events.isNull(i) {
		return t.kind(events.value(i))
	}
	x := events.idx[i]
	k := t.kindMemo[x]
	if k == kindUnknown {
		var ok bool
		if k, ok = t.kind(events.strs.Value(int(x))); !ok {
			k = kindOther
		}
		t.kindMemo[x] = k
	}
	return k, k != kindOther
}

// ofExperiment reports whether exposure row i is of this experiment; a
// tally without a key takes every key and records it (experimentKeys).
func (t *Tallier) ofExperiment(exps *textColumn, i int) bool {
	if exps.isNull(i) {
		return t.keyMatches("")
	}
	if exps.idx == nil {
		return t.keyMatches(exps.strs.Value(i))
	}
	x := exps.idx[i]
	if m := t.expMemo[x]; m != 0 {
		return m == 1
	}
	ok := t.keyMatches(exps.strs.Value(int(x)))
	t.expMemo[x] = 2
	if ok {
		t.expMemo[x] = 1
	}
	return ok
}

// keyMatches reports whether an exposure row's experiment key is this
// experiment's (see ofExperiment).
func (t *Tallier) keyMatches(key string) bool {
	if t.spec.Key == "" {
		if _, ok := t.expKeys[key]; !ok {
			t.expKeys[strings.Clone(key)] = struct{}{}
		}
		return true
	}
	return key == t.spec.Key
}

// armOf returns the arm of exposure row i, adding it when new (arm).
func (t *Tallier) armOf(arms *textColumn, i int) int32 {
	switch {
	case arms.arr == nil || arms.isNull(i):
		return t.arm("")
	case arms.idx == nil:
		return t.arm(arms.strs.Value(i))
	}
	x := arms.idx[i]
	if a := t.armMemo[x]; a >= 0 {
		return a
	}
	a := t.arm(arms.strs.Value(int(x)))
	t.armMemo[x] = a
	return a
}

// Events returns the event names whose rows the tallier uses: the
// exposure event, then the metrics' events in spec order. A reader may
// leave out the rows of every other event and report them through
// AddFiltered instead: the tally is the same.
func (t *Tallier) Events() []string {
	return append([]string{t.spec.ExposureEvent}, t.metricNames...)
}

// AddFiltered accounts for the given number of valid rows that a reader
// left out because their event is not among Events, the largest of whose
// ts is maxTS (Unix nanoseconds): they count as rows read and as rows of
// other events, and their times move the data's freshness (the maturity
// horizon when the spec has no end), exactly as if Add had seen them.
func (t *Tallier) AddFiltered(rows, maxTS int64) {
	if rows <= 0 {
		return
	}
	t.fin = nil
	t.diag.RowsRead += rows
	t.diag.NotMetricEvents += rows
	if t.hasAsOf && maxTS >= t.asOf {
		// Their latest time is after the look being rerun: it cannot be
		// that look's freshness (their count stays not_metric_event).
		return
	}
	if !t.hasFresh || maxTS > t.fresh {
		t.fresh, t.hasFresh = maxTS, true
	}
}

// SeeTime raises the data's freshness (the largest ts read, the maturity
// horizon of a spec without an end) to ts when it is later, without
// counting a row. Talliers of the hash partitions of one input see the
// whole input's freshness this way, so that their tallies merge exactly
// (see MergeTallies).
func (t *Tallier) SeeTime(ts int64) {
	if t.hasAsOf && ts >= t.asOf {
		return
	}
	if !t.hasFresh || ts > t.fresh {
		t.fin = nil
		t.fresh, t.hasFresh = ts, true
	}
}

// checkKeys refuses a run without an experiment key over exposures of
// several experiments.
func (t *Tallier) checkKeys() error {
	if t.spec.Key == "" && len(t.expKeys) > 1 {
		return ambiguousKeys(t.experimentKeys())
	}
	return nil
}

// ambiguousKeys is the error of a run without an experiment key over
// exposure rows of the sorted keys.
func ambiguousKeys(keys []string) error {
	return fmt.Errorf("exposure rows carry %d experiment keys (%s): choose one", len(keys), strings.Join(keys, ", "))
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
	if t.saved != nil {
		t.fin = t.finishResumed()
		return t.fin
	}
	nm := len(t.spec.Metrics)
	f := &finished{diag: t.diag, converted: make([][]bool, len(t.parts))}
	d := &f.diag
	d.OutsideAttribution = append([]int64(nil), t.diag.OutsideAttribution...)
	// Each partition attributes its own units' events on its own
	// goroutine, counting into its own diagnostics, summed after.
	diags := make([]TallyDiagnostics, len(t.parts))
	var wg sync.WaitGroup
	for p := range t.parts {
		diags[p].OutsideAttribution = make([]int64, nm)
		wg.Go(func() { f.converted[p] = t.attribute(p, &diags[p]) })
	}
	wg.Wait()
	for _, pd := range diags {
		// Only the attribution's counters are set in pd; the lengths
		// match, so sumDiag cannot fail.
		_ = sumDiag(d, pd, nm)
	}
	t.fin = f
	return f
}

// attribute attributes partition p's metric events to its units and
// returns its conversion flags, converted[u*nm+m] for unit u and metric
// m, counting the events it drops and attributes in a (UnitNeverExposed,
// UnitExcluded, BeforeExposure, MetricEventsInUnit, OutsideAttribution,
// which must have one element per metric).
func (t *Tallier) attribute(p int, a *TallyDiagnostics) []bool {
	nm := len(t.spec.Metrics)
	pt := t.parts[p]
	converted := hugepage.Make[bool](pt.state.len() * nm)
	for j := range pt.events.len() {
		e := pt.events.at(j)
		s := pt.state.at(int(e.unit))
		switch {
		case s.armAtT0 < 0:
			a.UnitNeverExposed++
			continue
		case status(s, t.spec.MultiArm) != StatusAnalysed:
			a.UnitExcluded++
			continue
		case e.ts < s.t0:
			a.BeforeExposure++
			continue
		}
		a.MetricEventsInUnit++
		for _, m := range t.metricsOf[e.event] {
			w := int64(t.spec.Metrics[m].Window)
			if w > 0 && e.ts-s.t0 >= w {
				a.OutsideAttribution[m]++
				continue
			}
			converted[int(e.unit)*nm+m] = true
		}
	}
	return converted
}

// record fills rec for exposed unit u of partition p (its key only when
// withKey).
func (t *Tallier) record(f *finished, p int, u int32, withKey bool, rec *UnitRecord) {
	pt := t.parts[p]
	pt.fill(u, t.spec.MultiArm, true, withKey, rec)
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
		rec.Converted[m] = analysed && f.converted[p][int(u)*nm+m]
		rec.Immature[m] = analysed && w > 0 && pt.state.at(int(u)).t0 > horizon-w
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
	if f.stale != nil {
		return nil, f.stale
	}
	if f.merged != nil {
		return t.mergedUnits(f.merged)
	}
	// Each partition's units sorted, then merged: keys are unique
	// across partitions.
	type cursor struct {
		p     int
		order []int32
	}
	var cs []*cursor
	for p, pt := range t.parts {
		if order := pt.sortedUnits(); len(order) > 0 {
			cs = append(cs, &cursor{p: p, order: order})
		}
	}
	return func(yield func(UnitRecord) bool) {
		for len(cs) > 0 {
			best := 0
			for i := 1; i < len(cs); i++ {
				a, b := cs[i], cs[best]
				if bytes.Compare(t.parts[a.p].units.key(a.order[0]), t.parts[b.p].units.key(b.order[0])) < 0 {
					best = i
				}
			}
			c := cs[best]
			var rec UnitRecord
			t.record(f, c.p, c.order[0], true, &rec)
			if c.order = c.order[1:]; len(c.order) == 0 {
				cs = slices.Delete(cs, best, best+1)
			}
			if !yield(rec) {
				return
			}
		}
	}, nil
}

// sumUnits adds every exposed unit's record to acc: each partition's
// units into an accumulator of its own, on its own goroutine, merged into
// acc in partition order. The sums do not depend on the order.
func (t *Tallier) sumUnits(f *finished, acc *Accumulator) error {
	accs := make([]*Accumulator, len(t.parts))
	errs := make([]error, len(t.parts))
	var wg sync.WaitGroup
	for p, pt := range t.parts {
		a, err := NewAccumulator(t.spec)
		if err != nil {
			return err
		}
		accs[p] = a
		if len(t.spec.Segments) == 0 {
			wg.Go(func() { t.sumPart(f, p, a) })
			continue
		}
		wg.Go(func() {
			var rec UnitRecord
			for u := range pt.state.len() {
				if pt.state.at(u).armAtT0 < 0 {
					continue
				}
				t.record(f, p, int32(u), false, &rec)
				if err := a.Add(rec); err != nil {
					errs[p] = err
					return
				}
			}
		})
	}
	wg.Wait()
	if err := errors.Join(errs...); err != nil {
		return err
	}
	for _, a := range accs {
		acc.merge(a)
	}
	return nil
}

// sumPart adds the exposed units of partition p of a tally without
// segment dimensions to acc, as adding each unit's record (record) would:
// it sums them per arm first, then hands the sums to acc (addArmSums),
// instead of building ten million records one by one, which took about a
// twentieth of a large run's CPU time.
func (t *Tallier) sumPart(f *finished, p int, acc *Accumulator) {
	pt := t.parts[p]
	nm := len(t.spec.Metrics)
	horizon := t.fresh
	if t.hasEnd {
		horizon = t.end
	}
	windows := make([]int64, nm)
	for m, mt := range t.spec.Metrics {
		windows[m] = int64(mt.Window)
	}
	exclude := t.spec.Maturity == MaturityExclude
	sums := make([]armSums, len(pt.arms))
	for a := range sums {
		sums[a] = armSums{first: math.MaxInt64, metrics: make([]Count, nm)}
	}
	converted := f.converted[p]
	for u := range pt.state.len() {
		s := pt.state.at(u)
		if s.armAtT0 < 0 {
			continue
		}
		a := &sums[s.armAtT0]
		a.exposed++
		a.first = min(a.first, s.t0)
		if s.multi() {
			a.multi++
		}
		switch status(s, t.spec.MultiArm) {
		case StatusTied:
			a.tied++
			continue
		case StatusMultiArm:
			continue
		}
		a.units++
		for m, w := range windows {
			c := &a.metrics[m]
			if w > 0 && s.t0 > horizon-w {
				c.Immature++
				if exclude {
					continue
				}
			}
			c.Units++
			if converted[u*nm+m] {
				c.Conversions++
			}
		}
	}
	for a, sum := range sums {
		if sum.exposed > 0 {
			acc.addArmSums(pt.arms[a], sum)
		}
	}
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
	if f.stale != nil {
		return Tally{}, f.stale
	}
	acc, err := NewAccumulator(t.spec)
	if err != nil {
		return Tally{}, err
	}
	for _, pt := range t.parts {
		pt.seeArms(acc)
	}
	if f.merged != nil {
		if err := t.addGroups(acc, f.merged); err != nil {
			return Tally{}, err
		}
	}
	if f.merged == nil { // a resumed tally's units are summed in its groups
		if err := t.sumUnits(f, acc); err != nil {
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
