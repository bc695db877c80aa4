package experiment

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
)

// unitState is the per-unit exposure state: 16 bytes, for it is most of
// a large tally's memory (ten million units held 240 MB in 24 bytes).
type unitState struct {
	t0      int64
	armAtT0 int32 // arm index of the earliest exposure; -1 when unexposed
	// first holds, in its low bits (firstArmMask), the arm index of the
	// first exposure row met in reading order plus one (0: none yet), and
	// the flags stateTied (two arms at t0) and stateMulti (two or more
	// distinct arms among in-window exposures).
	first uint32
}

const (
	firstArmMask = 1<<30 - 1
	stateTied    = 1 << 30
	stateMulti   = 1 << 31
	// maxArms bounds the distinct arm names of a tally, so that an arm
	// index fits firstArmMask and a saved state's arm field
	// (unitFlagBits); Add fails past it.
	maxArms = 1<<(32-unitFlagBits) - 1
)

// firstArm returns the arm index of the unit's first exposure row in
// reading order, -1 when none.
func (s *unitState) firstArm() int32 { return int32(s.first&firstArmMask) - 1 }

// tied reports two arms at the unit's t0.
func (s *unitState) tied() bool { return s.first&stateTied != 0 }

// multi reports two or more distinct arms among the unit's in-window
// exposures.
func (s *unitState) multi() bool { return s.first&stateMulti != 0 }

// setTied sets or clears the tie flag.
func (s *unitState) setTied(v bool) {
	s.first &^= stateTied
	if v {
		s.first |= stateTied
	}
}

// segNull is the interned index of a null segment value.
const segNull = -1

// exposures holds what the event log and the unit table share: the units,
// their first exposure, arm and segment values, and the arms seen. Segment
// values are interned per dimension, so a unit costs one int32 per
// dimension.
type exposures struct {
	units    unitIndex
	state    chunked[unitState]
	dims     int
	segs     []int32 // dims values per unit, segNull for null
	segIndex []map[string]int32
	segVals  [][]string
	armIndex map[string]int32
	arms     []string
	armFirst []int64 // earliest exposure seen per arm; math.MaxInt64 when none
	// maxSeg is the spec's limit of distinct values per dimension;
	// segOver is the first dimension past it plus one (0 when none).
	maxSeg  int
	segOver int
}

func newExposures(spec Spec) exposures {
	x := exposures{
		units:    newUnitIndex(),
		dims:     len(spec.Segments),
		armIndex: make(map[string]int32),
		maxSeg:   spec.maxSegmentValues(),
	}
	x.segIndex = make([]map[string]int32, x.dims)
	x.segVals = make([][]string, x.dims)
	for d := range x.segIndex {
		x.segIndex[d] = make(map[string]int32)
	}
	for _, a := range spec.Arms {
		x.arm(a)
	}
	return x
}

// arm returns the index of the named arm, adding it when new.
func (x *exposures) arm(name string) int32 {
	if a, ok := x.armIndex[name]; ok {
		return a
	}
	a := int32(len(x.arms))
	name = strings.Clone(name)
	x.armIndex[name] = a
	x.arms = append(x.arms, name)
	x.armFirst = append(x.armFirst, math.MaxInt64)
	return a
}

// unit returns the index of the unit, adding it (unexposed) when new.
func (x *exposures) unit(key string) int32 {
	u, ok := x.units.lookup(key)
	if !ok {
		x.addUnit()
	}
	return u
}

// unitHashed is unit with the key's hash under the index's seed already
// computed.
func (x *exposures) unitHashed(key string, hash uint64) int32 {
	u, ok := x.units.lookupHashed(key, hash)
	if !ok {
		x.addUnit()
	}
	return u
}

// addUnit adds the state of a new, unexposed unit.
func (x *exposures) addUnit() {
	x.state.add(unitState{armAtT0: -1})
	for range x.dims {
		x.segs = append(x.segs, segNull)
	}
}

// segValue interns the segment value of dimension d in row i of col.
func (x *exposures) segValue(d int, col *array.String, i int) int32 {
	if !col.IsValid(i) {
		return segNull
	}
	return x.internSeg(d, col.Value(i))
}

// internSeg interns value s of dimension d.
func (x *exposures) internSeg(d int, s string) int32 {
	if v, ok := x.segIndex[d][s]; ok {
		return v
	}
	v := int32(len(x.segVals[d]))
	if int(v) >= x.maxSeg && x.segOver == 0 {
		x.segOver = d + 1
	}
	s = strings.Clone(s)
	x.segIndex[d][s] = v
	x.segVals[d] = append(x.segVals[d], s)
	return v
}

// segmentLimit returns a *SegmentLimitError when a dimension has more
// distinct values than the spec allows, or nil.
func (x *exposures) segmentLimit(spec Spec) error {
	if x.segOver == 0 {
		return nil
	}
	return &SegmentLimitError{Dimension: spec.Segments[x.segOver-1], Limit: x.maxSeg}
}

// segLess reports whether interned value a of dimension d comes before b
// in CompareSegmentValues order (null last).
func (x *exposures) segLess(d int, a, b int32) bool { return segValueLess(x.segVals[d], a, b) }

// segValueLess orders interned values a and b of vals (null last).
func segValueLess(vals []string, a, b int32) bool {
	switch {
	case a == segNull:
		return false
	case b == segNull:
		return true
	}
	return vals[a] < vals[b]
}

// expose records an in-window exposure of unit u in arm a at time at, with
// the segment values of row i of segCols. The earliest exposure decides
// t0, the arm and the segment values; exposures at t0 in two arms make a
// tie (the smaller arm name is kept, so the order of rows does not
// matter), and disagreeing segment values at t0 keep the smallest.
func (x *exposures) expose(u, a int32, at int64, segCols []*array.String, i int) {
	if at < x.armFirst[a] {
		x.armFirst[a] = at
	}
	s := x.state.at(int(u))
	base := int(u) * x.dims
	switch {
	case s.armAtT0 < 0 || at < s.t0:
		s.t0, s.armAtT0 = at, a
		s.setTied(false)
		for d, col := range segCols {
			x.segs[base+d] = x.segValue(d, col, i)
		}
	case at == s.t0:
		if a != s.armAtT0 {
			s.setTied(true)
			if x.arms[a] < x.arms[s.armAtT0] {
				s.armAtT0 = a
			}
		}
		for d, col := range segCols {
			if v := x.segValue(d, col, i); x.segLess(d, v, x.segs[base+d]) {
				x.segs[base+d] = v
			}
		}
	}
	if f := s.firstArm(); f < 0 {
		s.first |= uint32(a) + 1
	} else if f != a {
		s.first |= stateMulti
	}
}

// status applies the multi-arm policy to a unit.
func status(s *unitState, policy MultiArmPolicy) UnitStatus {
	switch {
	case s.multi() && policy == MultiArmExclude:
		return StatusMultiArm
	case s.tied() && policy == MultiArmFirst:
		return StatusTied
	}
	return StatusAnalysed
}

// fill sets the fields of rec that the exposures decide: unit, arm, t0,
// segment values, status and the multi-arm flag. rec.Segments is reused
// when it has the right length. The unit key is materialised only when
// withKey: the records that stay inside the package (summed at once, and
// always matching the spec) do without it.
func (x *exposures) fill(u int32, policy MultiArmPolicy, hasT0, withKey bool, rec *UnitRecord) {
	s := x.state.at(int(u))
	rec.Unit = ""
	if withKey {
		rec.Unit = x.units.keyString(u)
	}
	rec.Arm = x.arms[s.armAtT0]
	rec.T0, rec.HasT0 = 0, hasT0
	if hasT0 {
		rec.T0 = s.t0
	}
	if len(rec.Segments) != x.dims {
		rec.Segments = make([]SegmentValue, x.dims)
	}
	for d := range x.dims {
		v := x.segs[int(u)*x.dims+d]
		if v == segNull {
			rec.Segments[d] = SegmentValue{}
		} else {
			rec.Segments[d] = SegmentValue{Value: x.segVals[d][v], Valid: true}
		}
	}
	rec.Status = status(s, policy)
	rec.MultiArm = s.multi()
}

// sortedUnits returns the indices of the exposed units sorted by key.
func (x *exposures) sortedUnits() []int32 {
	var idx []int32
	for u := range x.state.len() {
		if x.state.at(u).armAtT0 >= 0 {
			idx = append(idx, int32(u))
		}
	}
	slices.SortFunc(idx, func(a, b int32) int { return x.units.compare(a, b) })
	return idx
}

// seeArms tells acc about every arm seen, with its earliest exposure.
func (x *exposures) seeArms(acc *Accumulator) {
	for a, name := range x.arms {
		acc.SeeArm(name, x.armFirst[a], x.armFirst[a] != math.MaxInt64)
	}
}

// typedColumn returns the named column as a T (want names the type for
// the error), nil when absent and not required.
func typedColumn[T arrow.Array](rec arrow.RecordBatch, table, name string, required bool, want string) (T, error) {
	var none T
	idx := rec.Schema().FieldIndices(name)
	if len(idx) == 0 {
		if required {
			return none, fmt.Errorf("%s has no %q column", table, name)
		}
		return none, nil
	}
	col, ok := rec.Column(idx[0]).(T)
	if !ok {
		return none, fmt.Errorf("%s column %q is %s, want %s", table, name, rec.Column(idx[0]).DataType(), want)
	}
	return col, nil
}

// stringColumn returns the named utf8 column, nil when absent.
func stringColumn(rec arrow.RecordBatch, table, name string, required bool) (*array.String, error) {
	return typedColumn[*array.String](rec, table, name, required, "utf8")
}

// segmentColumns returns the segment columns of spec, all required.
func segmentColumns(rec arrow.RecordBatch, table string, spec Spec) ([]*array.String, error) {
	cols := make([]*array.String, len(spec.Segments))
	for d, name := range spec.Segments {
		c, err := stringColumn(rec, table, name, true)
		if err != nil {
			return nil, fmt.Errorf("segment dimension %q: %w", name, err)
		}
		cols[d] = c
	}
	return cols, nil
}

// timestampColumn returns the named timestamp[ns] column, nil when absent
// and not required.
func timestampColumn(rec arrow.RecordBatch, table, name string, required bool) (*array.Timestamp, error) {
	col, err := typedColumn[*array.Timestamp](rec, table, name, required, "timestamp")
	if col == nil || err != nil {
		return col, err
	}
	if unit := col.DataType().(*arrow.TimestampType).Unit; unit != arrow.Nanosecond {
		return nil, fmt.Errorf("%s column %q has unit %s, want ns", table, name, unit)
	}
	return col, nil
}
