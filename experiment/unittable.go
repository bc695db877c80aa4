package experiment

import (
	"fmt"
	"iter"
	"math"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
)

// UnitTableTallier reduces the unit table (the wide input shape: one row
// per unit with its arm and one conversion flag per metric; see ColMetric
// for the logical columns) to unit records and a Tally, under the same
// rules as the event log where the table has what they need:
//
//   - Each row is an exposure of its unit. With a ts column, rows outside
//     the analysis window [Start, End) are ignored and counted (like
//     exposures outside the window); without one, every row counts and
//     the window is not applied.
//   - A unit on two or more rows follows the multi-arm rules. Rows in
//     distinct arms make it a multi-arm unit (left out under
//     MultiArmExclude). Under MultiArmFirst the arm of its earliest row
//     decides; two arms at the earliest time make it tied (left out).
//     Without a ts column no row is earlier than another, so under
//     MultiArmFirst a unit in two arms is always tied: the table cannot
//     say which arm came first. Rows in the same arm are one unit.
//   - A unit converted on a metric when any of its in-window rows says so.
//   - Its segment values are those of its earliest row; when several rows
//     tie (always, without ts), the smallest value per dimension, null last.
//   - Immature units can only be known with a ts column and a window end:
//     a unit is immature on a metric with a finite window W when
//     t0 + W > End. Otherwise no unit is immature (there is no freshness:
//     the table carries no conversion times).
//
// A UnitTableTallier is not safe for concurrent use.
type UnitTableTallier struct {
	spec     Spec
	start    int64
	end      int64
	hasStart bool
	hasEnd   bool
	exposures
	// converted[u*nm+m] marks unit u converted on metric m on some
	// in-window row.
	converted []bool
	hasTS     int // 0 before the first batch, 1 with a ts column, -1 without
	rows      int64
	outside   int64
}

// NewUnitTableTallier validates spec for a unit table and returns a
// UnitTableTallier. The metrics' event sets are not used (the table holds
// the conversion flags already); their windows are, for maturity.
func NewUnitTableTallier(spec Spec) (*UnitTableTallier, error) {
	reserved := []string{ColUser, ColArm, ColTS}
	for _, m := range spec.Metrics {
		reserved = append(reserved, m.Name)
	}
	if err := spec.validate(reserved...); err != nil {
		return nil, err
	}
	for _, m := range spec.Metrics {
		if m.Name == ColUser || m.Name == ColArm || m.Name == ColTS {
			return nil, fmt.Errorf("experiment %q: metric %q has the name of a column of the unit table", spec.Key, m.Name)
		}
	}
	u := &UnitTableTallier{spec: spec, exposures: newExposures(spec)}
	if spec.Start != nil {
		u.start, u.hasStart = spec.Start.UnixNano(), true
	}
	if spec.End != nil {
		u.end, u.hasEnd = spec.End.UnixNano(), true
	}
	return u, nil
}

// Add applies one record batch of the logical unit table. Row numbers in
// its errors count the rows of every batch added, from 1.
func (t *UnitTableTallier) Add(rec arrow.RecordBatch) error {
	const table = "unit table"
	users, err := stringColumn(rec, table, ColUser, true)
	if err != nil {
		return err
	}
	arms, err := stringColumn(rec, table, ColArm, true)
	if err != nil {
		return err
	}
	segs, err := segmentColumns(rec, table, t.spec)
	if err != nil {
		return err
	}
	tsCol, err := timestampColumn(rec, table, ColTS, false)
	if err != nil {
		return err
	}
	has := -1
	if tsCol != nil {
		has = 1
	}
	if t.hasTS != 0 && has != t.hasTS {
		return fmt.Errorf("unit table: some batches have a %q column and some do not", ColTS)
	}
	t.hasTS = has
	flags := make([]*array.Boolean, len(t.spec.Metrics))
	for m, mt := range t.spec.Metrics {
		idx := rec.Schema().FieldIndices(mt.Name)
		if len(idx) == 0 {
			return fmt.Errorf("unit table has no column for metric %q", mt.Name)
		}
		col, ok := rec.Column(idx[0]).(*array.Boolean)
		if !ok {
			return fmt.Errorf("unit table column %q (metric) is %s, want bool", mt.Name, rec.Column(idx[0]).DataType())
		}
		flags[m] = col
	}
	nm := len(t.spec.Metrics)
	n := int(rec.NumRows())
	for i := 0; i < n; i++ {
		row := t.rows + int64(i) + 1
		if !users.IsValid(i) || users.Value(i) == "" {
			return fmt.Errorf("unit table row %d: column %q: null or empty unit", row, ColUser)
		}
		if !arms.IsValid(i) || arms.Value(i) == "" {
			return fmt.Errorf("unit table row %d: column %q: null or empty arm", row, ColArm)
		}
		for m, col := range flags {
			if !col.IsValid(i) {
				return fmt.Errorf("unit table row %d: column %q: null conversion flag", row, t.spec.Metrics[m].Name)
			}
		}
		var at int64
		if tsCol != nil {
			if !tsCol.IsValid(i) {
				return fmt.Errorf("unit table row %d: column %q: null exposure time", row, ColTS)
			}
			at = int64(tsCol.Value(i))
			if (t.hasStart && at < t.start) || (t.hasEnd && at >= t.end) {
				t.outside++
				continue
			}
		}
		a := t.arm(arms.Value(i))
		if int(a) >= maxArms {
			return fmt.Errorf("unit table row %d: column %q: more than %d distinct arm names", row, ColArm, maxArms)
		}
		u := t.unit(users.Value(i))
		t.expose(u, a, at, segs, i)
		for len(t.converted) < t.state.len()*nm {
			t.converted = append(t.converted, false)
		}
		for m, col := range flags {
			if col.Value(i) {
				t.converted[int(u)*nm+m] = true
			}
		}
	}
	t.rows += int64(n)
	return t.segmentLimit(t.spec)
}

// record fills rec for exposed unit u (its key only when withKey).
func (t *UnitTableTallier) record(u int32, withKey bool, rec *UnitRecord) {
	timed := t.hasTS > 0
	t.fill(u, t.spec.MultiArm, timed, withKey, rec)
	nm := len(t.spec.Metrics)
	if len(rec.Converted) != nm {
		rec.Converted, rec.Immature = make([]bool, nm), make([]bool, nm)
	}
	analysed := rec.Status == StatusAnalysed
	for m, mt := range t.spec.Metrics {
		w := int64(mt.Window)
		rec.Converted[m] = analysed && t.converted[int(u)*nm+m]
		rec.Immature[m] = analysed && timed && t.hasEnd && w > 0 && t.state.at(int(u)).t0 > t.end-w
	}
}

// Units returns one record per unit with an in-window row, sorted by unit
// key (bytewise). Each record yielded is fresh: the caller may keep it.
func (t *UnitTableTallier) Units() iter.Seq[UnitRecord] {
	order := t.sortedUnits()
	return func(yield func(UnitRecord) bool) {
		for _, u := range order {
			var rec UnitRecord
			t.record(u, true, &rec)
			if !yield(rec) {
				return
			}
		}
	}
}

// Tally sums the unit records. Its diagnostics count the rows read (each
// an exposure row), the rows outside the window, and the units; the
// counters that only an event log has (events by fate, experiment keys,
// freshness) stay zero.
func (t *UnitTableTallier) Tally() (Tally, error) {
	acc, err := NewAccumulator(t.spec)
	if err != nil {
		return Tally{}, err
	}
	for a, name := range t.arms {
		acc.SeeArm(name, t.armFirst[a], t.hasTS > 0 && t.armFirst[a] != math.MaxInt64)
	}
	var rec UnitRecord
	for u := range t.state.len() {
		if t.state.at(u).armAtT0 < 0 {
			continue
		}
		t.record(int32(u), false, &rec)
		if err := acc.Add(rec); err != nil {
			return Tally{}, err
		}
	}
	out := acc.Tally()
	out.Input = InputUnitTable
	out.Diag.RowsRead = t.rows
	out.Diag.ExposureRows = t.rows
	out.Diag.ExposuresOutsideWindow = t.outside
	out.Diag.OutsideAttribution = make([]int64, len(t.spec.Metrics))
	return out, nil
}
