package experiment

import (
	"cmp"
	"fmt"
	"math"
	"slices"
	"sort"
)

// SegmentValue is one unit's value of one segment dimension. Valid is false
// for a null value, which is a segment of its own.
type SegmentValue struct {
	Value string
	Valid bool
}

// NullSegmentText is how a null segment value is printed.
const NullSegmentText = "(null)"

// String returns the value, or NullSegmentText for a null.
func (v SegmentValue) String() string {
	if !v.Valid {
		return NullSegmentText
	}
	return v.Value
}

// CompareSegmentValues orders segment values: strings by their bytes, and
// null after every string. It returns -1, 0 or +1.
func CompareSegmentValues(a, b SegmentValue) int {
	switch {
	case a.Valid && b.Valid:
		return cmp.Compare(a.Value, b.Value)
	case a.Valid:
		return -1
	case b.Valid:
		return 1
	}
	return 0
}

// UnitStatus is what the multi-arm policy made of a unit.
type UnitStatus uint8

const (
	// StatusAnalysed: the unit is in the analysis population of its arm.
	StatusAnalysed UnitStatus = iota
	// StatusMultiArm: exposed to two or more arms and left out under the
	// policy MultiArmExclude.
	StatusMultiArm
	// StatusTied: under MultiArmFirst, its earliest exposures carry two
	// arms at the same instant, so it has no first arm and is left out.
	StatusTied
)

// String returns the status as the audit table spells it: analysed,
// multi_arm or tied.
func (s UnitStatus) String() string {
	switch s {
	case StatusAnalysed:
		return "analysed"
	case StatusMultiArm:
		return "multi_arm"
	case StatusTied:
		return "tied"
	}
	return fmt.Sprintf("UnitStatus(%d)", int(s))
}

// UnitRecord is the first stage of every tally: what the event semantics
// decided about one exposed unit. The event log (Tallier) and the unit
// table (UnitTableTallier) both reduce to these records; an Accumulator
// sums them into a Tally.
type UnitRecord struct {
	// Unit is the unit's key.
	Unit string
	// Arm is the arm of the unit's first exposure. For a tied unit it is
	// the smallest of the arm names at t0, so that it does not depend on
	// the order of the rows.
	Arm string
	// T0 is the first exposure time (Unix nanoseconds) when HasT0; a unit
	// table without exposure times has none.
	T0    int64
	HasT0 bool
	// Segments holds the unit's value of each dimension of Spec.Segments,
	// in that order.
	Segments []SegmentValue
	// Status is the outcome of the multi-arm policy.
	Status UnitStatus
	// MultiArm is true when the unit was exposed to two or more distinct
	// arms, whatever the policy made of it.
	MultiArm bool
	// Converted and Immature hold one flag per metric of the spec, in
	// spec order. Converted: the unit converted within its attribution
	// window. Immature: its attribution window had not closed by the
	// maturity horizon (the end of the analysis window, or the data's
	// freshness when there is no end). Both are false for a unit whose
	// Status is not StatusAnalysed. Whether an immature unit is counted is
	// for the Accumulator to decide, by the spec's maturity policy.
	Converted []bool
	Immature  []bool
}

// Accumulator is the second stage of every tally: it sums unit records
// into a Tally under one spec's maturity policy. The zero value is not
// usable; call NewAccumulator. An Accumulator is not safe for concurrent
// use.
type Accumulator struct {
	spec  Spec
	index map[string]int
	arms  []*accArm
	diag  TallyDiagnostics
}

// accArm is one arm's running sums.
type accArm struct {
	name     string
	first    int64 // math.MaxInt64 when unknown
	exposed  int64
	units    int64
	metrics  []Count
	segments []map[SegmentValue]*SegmentCell // per dimension
}

// addSums adds exposed and analysed units, an earliest exposure (T0;
// math.MaxInt64 for none) and per-metric counts to the arm's sums.
func (r *accArm) addSums(first, exposed, units int64, metrics []Count) {
	r.first = min(r.first, first)
	r.exposed += exposed
	r.units += units
	for m, c := range metrics {
		addCount(&r.metrics[m], c)
	}
}

// cell returns the arm's cell for value v of segment dimension d, added
// with nm zero metric counts when new.
func (r *accArm) cell(d int, v SegmentValue, nm int) *SegmentCell {
	c := r.segments[d][v]
	if c == nil {
		c = &SegmentCell{Value: v, Metrics: make([]Count, nm)}
		r.segments[d][v] = c
	}
	return c
}

// NewAccumulator returns an Accumulator for spec. It checks the parts of
// the spec that every input shape shares (metrics, arms, split, window,
// segment dimensions).
func NewAccumulator(spec Spec) (*Accumulator, error) {
	if err := spec.validate(); err != nil {
		return nil, err
	}
	a := &Accumulator{spec: spec, index: make(map[string]int)}
	for _, name := range spec.Arms {
		a.arm(name)
	}
	return a, nil
}

func (a *Accumulator) arm(name string) *accArm {
	if len(a.arms) <= smallArms {
		for _, r := range a.arms {
			if r.name == name {
				return r
			}
		}
	} else if i, ok := a.index[name]; ok {
		return a.arms[i]
	}
	r := &accArm{name: name, first: math.MaxInt64, metrics: make([]Count, len(a.spec.Metrics)),
		segments: make([]map[SegmentValue]*SegmentCell, len(a.spec.Segments))}
	for d := range r.segments {
		r.segments[d] = make(map[SegmentValue]*SegmentCell)
	}
	a.index[name] = len(a.arms)
	a.arms = append(a.arms, r)
	return r
}

// SeeArm makes an arm known even when no record names it (an arm seen only
// in later exposures of multi-arm units, say), and records an exposure
// time in it when known: the earliest one orders arms the spec does not
// list.
func (a *Accumulator) SeeArm(name string, exposure int64, known bool) {
	r := a.arm(name)
	if known && exposure < r.first {
		r.first = exposure
	}
}

// Add sums one unit record. It fails when the record's slices do not match
// the spec (one segment value per dimension, one flag per metric).
func (a *Accumulator) Add(rec UnitRecord) error { return a.addN(rec, 1) }

// addN sums n records equal to rec.
func (a *Accumulator) addN(rec UnitRecord, n int64) error {
	nm := len(a.spec.Metrics)
	if len(rec.Converted) != nm || len(rec.Immature) != nm {
		return fmt.Errorf("unit %q: record has %d conversion and %d maturity flags for %d metrics", rec.Unit, len(rec.Converted), len(rec.Immature), nm)
	}
	if len(rec.Segments) != len(a.spec.Segments) {
		return fmt.Errorf("unit %q: record has %d segment values for %d dimensions", rec.Unit, len(rec.Segments), len(a.spec.Segments))
	}
	r := a.arm(rec.Arm)
	if rec.HasT0 && rec.T0 < r.first {
		r.first = rec.T0
	}
	a.diag.UnitsExposed += n
	r.exposed += n
	if rec.MultiArm {
		a.diag.MultiArmUnits += n
	}
	switch rec.Status {
	case StatusAnalysed:
	case StatusTied:
		a.diag.TiedUnits += n
		return nil
	case StatusMultiArm:
		return nil
	default:
		return fmt.Errorf("unit %q: unknown status %v", rec.Unit, rec.Status)
	}
	r.units += n
	cells := make([]*SegmentCell, len(rec.Segments))
	for d, v := range rec.Segments {
		c := r.cell(d, v, nm)
		c.Units += n
		cells[d] = c
	}
	exclude := a.spec.Maturity == MaturityExclude
	for m := 0; m < nm; m++ {
		add := func(c *Count) {
			if rec.Immature[m] {
				c.Immature += n
				if exclude {
					return
				}
			}
			c.Units += n
			if rec.Converted[m] {
				c.Conversions += n
			}
		}
		add(&r.metrics[m])
		for _, c := range cells {
			add(&c.Metrics[m])
		}
	}
	return nil
}

// armSums are the sums of one arm's unit records in a spec without
// segment dimensions, made without the records (see Tallier.sumPart).
type armSums struct {
	exposed, units, multi, tied int64
	first                       int64 // earliest T0; math.MaxInt64 when none
	metrics                     []Count
}

// addArmSums adds s, the sums of records of the named arm, as addN would
// add them one by one; the spec must have no segment dimensions.
func (a *Accumulator) addArmSums(arm string, s armSums) {
	a.arm(arm).addSums(s.first, s.exposed, s.units, s.metrics)
	a.diag.UnitsExposed += s.exposed
	a.diag.MultiArmUnits += s.multi
	a.diag.TiedUnits += s.tied
}

// merge adds the sums of b, an Accumulator of the same spec, to a: the
// result is what a would hold had it been given b's records too. The
// unit counters of the diagnostics are summed; arms b has that a has not
// are added (Tally orders arms independently of the order they were met).
func (a *Accumulator) merge(b *Accumulator) {
	nm := len(a.spec.Metrics)
	for _, rb := range b.arms {
		r := a.arm(rb.name)
		r.addSums(rb.first, rb.exposed, rb.units, rb.metrics)
		for d, cells := range rb.segments {
			for v, cb := range cells {
				c := r.cell(d, v, nm)
				c.Units += cb.Units
				for m, n := range cb.Metrics {
					addCount(&c.Metrics[m], n)
				}
			}
		}
	}
	a.diag.UnitsExposed += b.diag.UnitsExposed
	a.diag.MultiArmUnits += b.diag.MultiArmUnits
	a.diag.TiedUnits += b.diag.TiedUnits
}

// addCell adds pre-aggregated counts: pop units of the arm's analysis
// population with the given segment values, and their counts per metric.
func (a *Accumulator) addCell(arm string, segs []SegmentValue, pop int64, counts []Count) {
	r := a.arm(arm)
	r.addSums(math.MaxInt64, pop, pop, counts)
	a.diag.UnitsExposed += pop
	for d, v := range segs {
		cell := r.cell(d, v, len(a.spec.Metrics))
		cell.Units += pop
		for m, c := range counts {
			addCount(&cell.Metrics[m], c)
		}
	}
}

// Tally returns the sums so far. Arms are ordered as listed in the spec,
// then by their earliest known exposure time, then those without one, each
// group by name. Every arm lists the same segment values per dimension
// (the union over arms, with zero counts where an arm has none), sorted by
// CompareSegmentValues. Only the unit counters of the diagnostics
// (UnitsExposed, MultiArmUnits, TiedUnits) are set.
func (a *Accumulator) Tally() Tally {
	nd := len(a.spec.Segments)
	union := make([][]SegmentValue, nd)
	for d := range union {
		seen := make(map[SegmentValue]bool)
		for _, r := range a.arms {
			for v := range r.segments[d] {
				if !seen[v] {
					seen[v] = true
					union[d] = append(union[d], v)
				}
			}
		}
		slices.SortFunc(union[d], CompareSegmentValues)
	}
	out := Tally{Diag: TallyDiagnostics{
		UnitsExposed:  a.diag.UnitsExposed,
		MultiArmUnits: a.diag.MultiArmUnits,
		TiedUnits:     a.diag.TiedUnits,
	}}
	for _, r := range a.arms {
		at := ArmTally{Name: r.name, Exposed: r.exposed, Units: r.units, Metrics: slices.Clone(r.metrics)}
		if r.first != math.MaxInt64 {
			at.FirstExposure, at.HasFirstExposure = r.first, true
		}
		if nd > 0 {
			at.Segments = make([]SegmentCounts, nd)
			for d, dim := range a.spec.Segments {
				sc := SegmentCounts{Dimension: dim, Values: make([]SegmentCell, len(union[d]))}
				for i, v := range union[d] {
					if c := r.segments[d][v]; c != nil {
						sc.Values[i] = SegmentCell{Value: v, Units: c.Units, Metrics: slices.Clone(c.Metrics)}
					} else {
						sc.Values[i] = SegmentCell{Value: v, Metrics: make([]Count, len(a.spec.Metrics))}
					}
				}
				at.Segments[d] = sc
			}
		}
		out.Arms = append(out.Arms, at)
	}
	orderArms(a.spec, out.Arms)
	return out
}

// orderArms sorts arms as listed in spec.Arms, then by earliest known
// exposure, then the arms without a known exposure, each by name.
func orderArms(spec Spec, arms []ArmTally) {
	listed := make(map[string]int, len(spec.Arms))
	for i, a := range spec.Arms {
		listed[a] = i
	}
	sort.SliceStable(arms, func(i, j int) bool {
		a, b := arms[i], arms[j]
		li, aListed := listed[a.Name]
		lj, bListed := listed[b.Name]
		switch {
		case aListed && bListed:
			return li < lj
		case aListed != bListed:
			return aListed
		case a.HasFirstExposure != b.HasFirstExposure:
			return a.HasFirstExposure
		case a.HasFirstExposure && a.FirstExposure != b.FirstExposure:
			return a.FirstExposure < b.FirstExposure
		}
		return a.Name < b.Name
	})
}

// MergeTallies sums tallies of the same spec made from parts of the input,
// as if the whole input had been tallied at once. Arms are matched by
// name, segment values by value; the arms are then ordered as a single
// tally would order them.
//
// The merge is exact (it gives the tally of the whole input, counter by
// counter) when:
//
//   - the parts hold disjoint sets of units, and every row of a unit is in
//     the same part (hash-partition the input by the unit key; splitting an
//     event log by time or by file is not enough, since a unit's exposures
//     and conversions may then fall in different parts);
//   - maturity was judged against the same horizon in every part: always
//     when the spec has a window end or no metric has a finite attribution
//     window; without an end, each part judged maturity against its own
//     freshness (the largest ts it read), so the merge is exact only when
//     every part has the same freshness as the whole, and otherwise counts
//     as mature some units the whole would count as immature;
//   - for counts tables, the parts hold disjoint units (a unit counted in
//     two parts is counted twice).
//
// Freshness is the largest of the parts'; experiment keys are the union,
// and a spec without a key whose parts together carry several is refused
// as the whole input would be; every other counter is the sum. All parts must come from the same input
// shape and have the spec's metrics and segment dimensions.
func MergeTallies(spec Spec, parts ...Tally) (Tally, error) {
	if len(parts) == 0 {
		return Tally{}, fmt.Errorf("merge: no tallies")
	}
	nm, nd := len(spec.Metrics), len(spec.Segments)
	out := Tally{Input: parts[0].Input}
	byName := make(map[string]int)
	keys := make(map[string]bool)
	out.Diag.OutsideAttribution = make([]int64, nm)
	for pi, p := range parts {
		if p.Input != out.Input {
			return Tally{}, fmt.Errorf("merge: part %d is from a %s, part 1 from a %s", pi+1, p.Input, out.Input)
		}
		if p.HasFreshness && (!out.HasFreshness || p.Freshness > out.Freshness) {
			out.Freshness, out.HasFreshness = p.Freshness, true
		}
		if err := sumDiag(&out.Diag, p.Diag, nm); err != nil {
			return Tally{}, fmt.Errorf("merge: part %d: %w", pi+1, err)
		}
		for _, k := range p.Diag.ExperimentKeys {
			keys[k] = true
		}
		for _, a := range p.Arms {
			if len(a.Metrics) != nm {
				return Tally{}, fmt.Errorf("merge: part %d: arm %q has %d metrics, the spec %d", pi+1, a.Name, len(a.Metrics), nm)
			}
			if len(a.Segments) != nd && len(a.Segments) != 0 {
				return Tally{}, fmt.Errorf("merge: part %d: arm %q has %d segment dimensions, the spec %d", pi+1, a.Name, len(a.Segments), nd)
			}
			i, ok := byName[a.Name]
			if !ok {
				i = len(out.Arms)
				byName[a.Name] = i
				m := ArmTally{Name: a.Name, Metrics: make([]Count, nm)}
				if nd > 0 {
					m.Segments = make([]SegmentCounts, nd)
					for d, dim := range spec.Segments {
						m.Segments[d].Dimension = dim
					}
				}
				out.Arms = append(out.Arms, m)
			}
			m := &out.Arms[i]
			m.Exposed += a.Exposed
			m.Units += a.Units
			if a.HasFirstExposure && (!m.HasFirstExposure || a.FirstExposure < m.FirstExposure) {
				m.FirstExposure, m.HasFirstExposure = a.FirstExposure, true
			}
			for k := range a.Metrics {
				addCount(&m.Metrics[k], a.Metrics[k])
			}
			for d, sc := range a.Segments {
				if sc.Dimension != spec.Segments[d] {
					return Tally{}, fmt.Errorf("merge: part %d: arm %q: segment dimension %d is %q, the spec's %q", pi+1, a.Name, d+1, sc.Dimension, spec.Segments[d])
				}
				for _, c := range sc.Values {
					if len(c.Metrics) != nm {
						return Tally{}, fmt.Errorf("merge: part %d: arm %q: segment %s=%s has %d metrics, the spec %d", pi+1, a.Name, sc.Dimension, c.Value, len(c.Metrics), nm)
					}
					mergeCell(&m.Segments[d], c)
				}
			}
		}
	}
	// Every arm lists the union of values, as a single tally does.
	for d := 0; d < nd; d++ {
		var union []SegmentValue
		seen := make(map[SegmentValue]bool)
		for _, a := range out.Arms {
			for _, c := range a.Segments[d].Values {
				if !seen[c.Value] {
					seen[c.Value] = true
					union = append(union, c.Value)
				}
			}
		}
		slices.SortFunc(union, CompareSegmentValues)
		for i := range out.Arms {
			sc := &out.Arms[i].Segments[d]
			have := make(map[SegmentValue]SegmentCell, len(sc.Values))
			for _, c := range sc.Values {
				have[c.Value] = c
			}
			vals := make([]SegmentCell, len(union))
			for j, v := range union {
				c, ok := have[v]
				if !ok {
					c = SegmentCell{Value: v, Metrics: make([]Count, nm)}
				}
				vals[j] = c
			}
			sc.Values = vals
		}
	}
	out.Diag.ExperimentKeys = make([]string, 0, len(keys))
	for k := range keys {
		out.Diag.ExperimentKeys = append(out.Diag.ExperimentKeys, k)
	}
	sort.Strings(out.Diag.ExperimentKeys)
	// Each part saw only its own keys: the whole may be ambiguous where no
	// part was, and is refused as Tallier.Tally refuses it.
	if spec.Key == "" && len(out.Diag.ExperimentKeys) > 1 {
		return Tally{}, ambiguousKeys(out.Diag.ExperimentKeys)
	}
	orderArms(spec, out.Arms)
	return out, nil
}

func mergeCell(sc *SegmentCounts, c SegmentCell) {
	for i := range sc.Values {
		if sc.Values[i].Value == c.Value {
			sc.Values[i].Units += c.Units
			for k := range c.Metrics {
				addCount(&sc.Values[i].Metrics[k], c.Metrics[k])
			}
			return
		}
	}
	sc.Values = append(sc.Values, SegmentCell{Value: c.Value, Units: c.Units, Metrics: slices.Clone(c.Metrics)})
}

func addCount(dst *Count, c Count) {
	dst.Units += c.Units
	dst.Conversions += c.Conversions
	dst.Immature += c.Immature
}

// sumDiag adds the counters of d to dst (all but ExperimentKeys).
func sumDiag(dst *TallyDiagnostics, d TallyDiagnostics, nm int) error {
	if len(d.OutsideAttribution) != nm && len(d.OutsideAttribution) != 0 {
		return fmt.Errorf("%d outside-attribution counters for %d metrics", len(d.OutsideAttribution), nm)
	}
	dst.RowsRead += d.RowsRead
	dst.ExposureRows += d.ExposureRows
	dst.ExposuresOutsideWindow += d.ExposuresOutsideWindow
	dst.OtherExperimentRows += d.OtherExperimentRows
	dst.NotMetricEvents += d.NotMetricEvents
	dst.MetricEvents += d.MetricEvents
	dst.AfterWindowEnd += d.AfterWindowEnd
	dst.AfterAsOf += d.AfterAsOf
	dst.UnitNeverExposed += d.UnitNeverExposed
	dst.UnitExcluded += d.UnitExcluded
	dst.BeforeExposure += d.BeforeExposure
	dst.MetricEventsInUnit += d.MetricEventsInUnit
	for i, n := range d.OutsideAttribution {
		dst.OutsideAttribution[i] += n
	}
	dst.UnitsExposed += d.UnitsExposed
	dst.MultiArmUnits += d.MultiArmUnits
	dst.TiedUnits += d.TiedUnits
	return nil
}
