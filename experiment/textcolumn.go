package experiment

import (
	"fmt"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
)

// textColumn is a text column of a record batch: utf8, or dictionary-
// encoded with int32 indices over utf8 values (the encoding that
// ingest.Options.DictionaryColumns gives the event, experiment and arm
// columns). Of a dictionary column a Tallier decides once per value of
// the batch's dictionary instead of once per row, and the values are the
// same either way.
type textColumn struct {
	arr  arrow.Array   // the column; nil when absent
	strs *array.String // the values: of the rows (idx nil), or the dictionary's
	idx  []int32       // of a dictionary column, each row's index into strs
	// nulls is whether the column has nulls at all: most have none, and
	// then isNull asks nothing of arr.
	nulls bool
}

// isNull reports whether row i is null.
func (c *textColumn) isNull(i int) bool { return c.nulls && c.arr.IsNull(i) }

// textColumnOf returns the named text column, with arr nil when it is
// absent and not required. A dictionary column's indices are checked
// against its dictionary.
func textColumnOf(rec arrow.RecordBatch, table, name string, required bool) (textColumn, error) {
	const want = "utf8 or dictionary<values=utf8, indices=int32>"
	idx := rec.Schema().FieldIndices(name)
	if len(idx) == 0 {
		if required {
			return textColumn{}, fmt.Errorf("%s has no %q column", table, name)
		}
		return textColumn{}, nil
	}
	switch col := rec.Column(idx[0]).(type) {
	case *array.String:
		return textColumn{arr: col, strs: col, nulls: col.NullN() > 0}, nil
	case *array.Dictionary:
		strs, ok := col.Dictionary().(*array.String)
		ind, ok2 := col.Indices().(*array.Int32)
		if !ok || !ok2 {
			return textColumn{}, fmt.Errorf("%s column %q is %s, want %s", table, name, col.DataType(), want)
		}
		c := textColumn{arr: col, strs: strs, idx: ind.Int32Values(), nulls: col.NullN() > 0}
		n := uint32(strs.Len())
		for i, x := range c.idx {
			if uint32(x) >= n && col.IsValid(i) {
				return textColumn{}, fmt.Errorf("%s column %q row %d: dictionary index %d of a dictionary of %d values", table, name, i, x, n)
			}
		}
		return c, nil
	default:
		return textColumn{}, fmt.Errorf("%s column %q is %s, want %s", table, name, col.DataType(), want)
	}
}

// value returns row i's text; "" when it is null.
func (c *textColumn) value(i int) string {
	if c.idx == nil {
		return c.strs.Value(i)
	}
	if c.isNull(i) {
		return ""
	}
	return c.strs.Value(int(c.idx[i]))
}

// memo returns s resized to one entry per value of a dictionary column,
// each set to unknown; nil for a utf8 column.
func memo[T any](c *textColumn, s []T, unknown T) []T {
	if c.idx == nil {
		return s[:0]
	}
	n := c.strs.Len()
	if cap(s) < n {
		s = make([]T, n)
	}
	s = s[:n]
	for i := range s {
		s[i] = unknown
	}
	return s
}
