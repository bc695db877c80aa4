package experiment

import (
	"strings"
	"testing"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
	"github.com/apache/arrow-go/v18/arrow/memory"
)

// A Tallier takes an event column as utf8 or as dictionary<int32, utf8>;
// other index types, values that are not utf8 and indices outside the
// dictionary are errors that name the column, and a null row's index is
// not checked.
func TestTextColumnOf(t *testing.T) {
	mem := memory.DefaultAllocator
	vals := func(vs ...string) arrow.Array {
		b := array.NewStringBuilder(mem)
		defer b.Release()
		b.AppendValues(vs, nil)
		return b.NewArray()
	}
	dict := func(idxType arrow.DataType, idx []int64, valid []bool, values arrow.Array) arrow.Array {
		b := array.NewBuilder(mem, idxType)
		defer b.Release()
		for i, x := range idx {
			switch ib := b.(type) {
			case *array.Int32Builder:
				if valid[i] {
					ib.Append(int32(x))
				} else {
					ib.AppendNull()
				}
			case *array.Int8Builder:
				ib.Append(int8(x))
			}
		}
		ind := b.NewArray()
		defer ind.Release()
		return array.NewDictionaryArray(&arrow.DictionaryType{IndexType: idxType, ValueType: values.DataType()}, ind, values)
	}
	i64 := array.NewInt64Builder(mem)
	i64.AppendValues([]int64{1, 2}, nil)
	ints := i64.NewArray()
	cases := []struct {
		name string
		col  arrow.Array
		err  string
		want []string
	}{
		{"utf8", vals("a", "b"), "", []string{"a", "b"}},
		{"dictionary", dict(arrow.PrimitiveTypes.Int32, []int64{1, 0, 7}, []bool{true, true, false}, vals("a", "b")), "", []string{"b", "a", ""}},
		{"index past the dictionary", dict(arrow.PrimitiveTypes.Int32, []int64{0, 2}, []bool{true, true}, vals("a", "b")), `column "event" row 1: dictionary index 2 of a dictionary of 2 values`, nil},
		{"negative index", dict(arrow.PrimitiveTypes.Int32, []int64{-1}, []bool{true}, vals("a")), `column "event" row 0: dictionary index -1`, nil},
		{"int8 indices", dict(arrow.PrimitiveTypes.Int8, []int64{0}, []bool{true}, vals("a")), `column "event" is dictionary<values=utf8, indices=int8`, nil},
		{"int64 values", dict(arrow.PrimitiveTypes.Int32, []int64{0}, []bool{true}, ints), `column "event" is dictionary<values=int64`, nil},
		{"int64", ints, `column "event" is int64, want utf8 or dictionary`, nil},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			schema := arrow.NewSchema([]arrow.Field{{Name: ColEvent, Type: tc.col.DataType(), Nullable: true}}, nil)
			rec := array.NewRecordBatch(schema, []arrow.Array{tc.col}, int64(tc.col.Len()))
			defer rec.Release()
			c, err := textColumnOf(rec, "event table", ColEvent, true)
			if tc.err != "" {
				if err == nil || !strings.Contains(err.Error(), tc.err) {
					t.Fatalf("error %v, want one holding %q", err, tc.err)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			for i, w := range tc.want {
				if got := c.value(i); got != w {
					t.Errorf("row %d: %q, want %q", i, got, w)
				}
			}
		})
	}
}
