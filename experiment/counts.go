package experiment

import (
	"fmt"
	"slices"
	"strconv"
	"strings"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
)

// CountsTallier turns a counts table (the aggregated input shape, such as
// a warehouse query's output; see ColMetric for the logical columns)
// into a Tally, with no unit records in between.
//
// Each row is one cell: an arm, one value per segment dimension of the
// spec (a null is the null value, as for units) and a metric, with the
// Count of that cell as the spec's maturity policy defines it: units
// analysed for the metric (under MaturityExclude without the immature
// units, under MaturityInclude with them), conversions among them, and
// optionally the immature units. The overall counts of an arm are the sums
// over its cells, and the counts of one segment value the sums over the
// other dimensions: the table is a GROUP BY arm, segments..., metric.
//
// The rules it enforces, each an error naming the rows:
//
//   - every value is present; units, conversions and immature are not
//     negative; conversions <= units; under MaturityInclude immature <=
//     units; the metric is one of the spec's;
//   - a cell appears once per metric: a duplicate is an error, not summed
//     (to add tables of disjoint units, tally each and use MergeTallies);
//   - a cell has a row for every metric of the spec, and the same units
//     in every metric: units + immature under MaturityExclude, units under
//     MaturityInclude. That common number is the cell's analysis
//     population, whose sum per arm feeds the sample ratio check. A table
//     that leaves immature units out of units without an immature column
//     fails this check when metrics have different windows.
//
// Units exposed to two arms cannot be seen in counts: the multi-arm and
// tied counters of the diagnostics stay zero, and units exposed is the sum
// of the arms' populations.
//
// A CountsTallier is not safe for concurrent use.
type CountsTallier struct {
	spec    Spec
	metrics map[string]int
	cells   map[string]*countCell
	rows    int64
}

// countCell is one arm and combination of segment values.
type countCell struct {
	arm    string
	segs   []SegmentValue
	counts []Count
	row    []int64 // row number per metric; 0 when no row yet
}

// NewCountsTallier validates spec for a counts table and returns a
// CountsTallier. The metrics' event sets and windows are not used.
func NewCountsTallier(spec Spec) (*CountsTallier, error) {
	if err := spec.validate(ColArm, ColMetric, ColUnits, ColConversions, ColImmature); err != nil {
		return nil, err
	}
	c := &CountsTallier{spec: spec, metrics: make(map[string]int), cells: make(map[string]*countCell)}
	for i, m := range spec.Metrics {
		c.metrics[m.Name] = i
	}
	return c, nil
}

// int64Column returns the named int64 column, nil when absent and not
// required.
func int64Column(rec arrow.RecordBatch, name string, required bool) (*array.Int64, error) {
	idx := rec.Schema().FieldIndices(name)
	if len(idx) == 0 {
		if required {
			return nil, fmt.Errorf("counts table has no %q column", name)
		}
		return nil, nil
	}
	col, ok := rec.Column(idx[0]).(*array.Int64)
	if !ok {
		return nil, fmt.Errorf("counts table column %q is %s, want int64", name, rec.Column(idx[0]).DataType())
	}
	return col, nil
}

// cellKey encodes an arm and segment values without ambiguity.
func cellKey(arm string, segs []SegmentValue) string {
	var b strings.Builder
	b.WriteString(strconv.Quote(arm))
	for _, v := range segs {
		if v.Valid {
			b.WriteString("," + strconv.Quote(v.Value))
		} else {
			b.WriteString(",null")
		}
	}
	return b.String()
}

// describe names a cell in error messages: arm "a", platform "ios".
func (c *CountsTallier) describe(arm string, segs []SegmentValue) string {
	s := fmt.Sprintf("arm %q", arm)
	for d, v := range segs {
		if v.Valid {
			s += fmt.Sprintf(", %s %q", c.spec.Segments[d], v.Value)
		} else {
			s += fmt.Sprintf(", %s null", c.spec.Segments[d])
		}
	}
	return s
}

// Add applies one record batch of the logical counts table. Row numbers in
// its errors count the rows of every batch added, from 1.
func (c *CountsTallier) Add(rec arrow.RecordBatch) error {
	const table = "counts table"
	arms, err := stringColumn(rec, table, ColArm, true)
	if err != nil {
		return err
	}
	metrics, err := stringColumn(rec, table, ColMetric, true)
	if err != nil {
		return err
	}
	segCols, err := segmentColumns(rec, table, c.spec)
	if err != nil {
		return err
	}
	units, err := int64Column(rec, ColUnits, true)
	if err != nil {
		return err
	}
	convs, err := int64Column(rec, ColConversions, true)
	if err != nil {
		return err
	}
	imms, err := int64Column(rec, ColImmature, false)
	if err != nil {
		return err
	}
	n := int(rec.NumRows())
	for i := 0; i < n; i++ {
		row := c.rows + int64(i) + 1
		at := func(col string) string { return fmt.Sprintf("counts table row %d: column %q", row, col) }
		if !arms.IsValid(i) || arms.Value(i) == "" {
			return fmt.Errorf("%s: null or empty arm", at(ColArm))
		}
		if !metrics.IsValid(i) {
			return fmt.Errorf("%s: null metric", at(ColMetric))
		}
		m, ok := c.metrics[metrics.Value(i)]
		if !ok {
			names := make([]string, len(c.spec.Metrics))
			for k, mt := range c.spec.Metrics {
				names[k] = mt.Name
			}
			return fmt.Errorf("%s: unknown metric %q (the metrics are %s)", at(ColMetric), metrics.Value(i), strings.Join(names, ", "))
		}
		var cnt Count
		for _, v := range []struct {
			name string
			col  *array.Int64
			dst  *int64
		}{{ColUnits, units, &cnt.Units}, {ColConversions, convs, &cnt.Conversions}, {ColImmature, imms, &cnt.Immature}} {
			if v.col == nil {
				continue
			}
			if !v.col.IsValid(i) {
				return fmt.Errorf("%s: null count", at(v.name))
			}
			if x := v.col.Value(i); x < 0 {
				return fmt.Errorf("%s: negative count %d", at(v.name), x)
			}
			*v.dst = v.col.Value(i)
		}
		if cnt.Conversions > cnt.Units {
			return fmt.Errorf("%s: %d conversions out of %d units", at(ColConversions), cnt.Conversions, cnt.Units)
		}
		if c.spec.Maturity == MaturityInclude && cnt.Immature > cnt.Units {
			return fmt.Errorf("%s: %d immature units out of %d units (under the maturity policy include, units count the immature ones)", at(ColImmature), cnt.Immature, cnt.Units)
		}
		segs := make([]SegmentValue, len(segCols))
		for d, col := range segCols {
			if col.IsValid(i) {
				segs[d] = SegmentValue{Value: col.Value(i), Valid: true}
			}
		}
		key := cellKey(arms.Value(i), segs)
		cell := c.cells[key]
		if cell == nil {
			cell = &countCell{arm: arms.Value(i), segs: segs, counts: make([]Count, len(c.spec.Metrics)), row: make([]int64, len(c.spec.Metrics))}
			c.cells[key] = cell
		}
		if first := cell.row[m]; first != 0 {
			return fmt.Errorf("counts table rows %d and %d: the same cell (%s, metric %q) twice; duplicates are not summed", first, row, c.describe(cell.arm, segs), c.spec.Metrics[m].Name)
		}
		cell.row[m] = row
		cell.counts[m] = cnt
	}
	c.rows += int64(n)
	return nil
}

// population is the cell's units for metric m before maturity.
func (c *CountsTallier) population(cnt Count) int64 {
	if c.spec.Maturity == MaturityExclude {
		return cnt.Units + cnt.Immature
	}
	return cnt.Units
}

// Tally checks that every cell is complete and consistent and returns the
// sums. Arms are ordered as listed in the spec, then by name.
func (c *CountsTallier) Tally() (Tally, error) {
	acc, err := NewAccumulator(c.spec)
	if err != nil {
		return Tally{}, err
	}
	keys := make([]string, 0, len(c.cells))
	for k := range c.cells {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	for _, k := range keys {
		cell := c.cells[k]
		pop := int64(-1)
		popMetric := -1
		for m, mt := range c.spec.Metrics {
			if cell.row[m] == 0 {
				return Tally{}, fmt.Errorf("counts table: %s has no row for metric %q", c.describe(cell.arm, cell.segs), mt.Name)
			}
			p := c.population(cell.counts[m])
			switch {
			case pop < 0:
				pop, popMetric = p, m
			case p != pop:
				what := "units + immature"
				if c.spec.Maturity == MaturityInclude {
					what = "units"
				}
				return Tally{}, fmt.Errorf("counts table rows %d and %d: %s: %s is %d for metric %q but %d for metric %q; every metric must count the same units",
					cell.row[popMetric], cell.row[m], c.describe(cell.arm, cell.segs), what, pop, c.spec.Metrics[popMetric].Name, p, mt.Name)
			}
		}
		acc.addCell(cell.arm, cell.segs, pop, cell.counts)
	}
	out := acc.Tally()
	out.Input = InputCounts
	out.Diag.RowsRead = c.rows
	out.Diag.OutsideAttribution = make([]int64, len(c.spec.Metrics))
	return out, nil
}
