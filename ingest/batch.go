package ingest

import (
	"strings"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
	"github.com/apache/arrow-go/v18/arrow/bitutil"
	"github.com/apache/arrow-go/v18/arrow/memory"
)

// batchBuilder accumulates valid rows in plain Go slices, reused from batch
// to batch, and makes them a record batch in one step: each column's
// buffers are allocated once, at their final size, from the allocator.
// (Appending value by value to Arrow's builders cost about 200 ns per row
// of five columns; see cmd/bench/BENCHMARKS.md.)
type batchBuilder struct {
	p   *plan
	mem memory.Allocator
	n   int
	str []*textColumn // per logical column; nil at colTS
	ts  []int64
}

// textColumn is one utf8 column being built, or one dictionary-encoded
// column (dict; see plan.dict).
type textColumn struct {
	offs  []int32 // n+1 offsets into data; of a dictionary column, of its values
	data  []byte
	valid []bool
	nulls int

	// A dictionary column: idx holds each row's place among the batch's
	// values (in offs and data, in order of first sight; 0 for a null),
	// places the place plus one of each code of the column's interner
	// (cell.code) met in the batch, used the codes set in places, and
	// byText the place of each value.
	dict   bool
	idx    []int32
	places []int32
	used   []int32
	byText map[string]int32
}

// place returns the place of v (not null) among a dictionary column's
// values, adding it when new.
func (c *textColumn) place(v cell) int32 {
	if v.code == 0 {
		return c.placeText(v.s)
	}
	k := int(v.code - 1)
	if k >= len(c.places) {
		c.places = append(c.places, make([]int32, k+1-len(c.places))...)
	}
	if p := c.places[k]; p > 0 {
		return p - 1
	}
	p := c.placeText(v.s)
	c.places[k] = p + 1
	c.used = append(c.used, int32(k))
	return p
}

// placeText is place by the value's text.
func (c *textColumn) placeText(s string) int32 {
	if p, ok := c.byText[s]; ok {
		return p
	}
	if c.byText == nil {
		c.byText = make(map[string]int32)
	}
	p := int32(len(c.offs) - 1)
	c.byText[strings.Clone(s)] = p
	c.data = append(c.data, s...)
	c.offs = append(c.offs, int32(len(c.data)))
	return p
}

// maxBatchBytes bounds the text bytes of one column in a batch, well below
// the 2 GiB that Arrow's int32 offsets allow; full reports when a batch
// should end early.
const maxBatchBytes = 1 << 30

func newBatchBuilder(mem memory.Allocator, p *plan) *batchBuilder {
	b := &batchBuilder{p: p, mem: mem, str: make([]*textColumn, len(p.logical))}
	for i := range p.logical {
		if i != colTS {
			b.str[i] = &textColumn{offs: []int32{0}, dict: p.dict != nil && p.dict[i]}
		}
	}
	return b
}

// append adds a row that plan.check accepted. An empty experiment, arm or
// segment becomes null.
func (b *batchBuilder) append(r *row) {
	for i, c := range b.str {
		if c == nil {
			continue
		}
		v := r.cells[i]
		if c.dict {
			null := v.null || (i > colEvent && v.s == "")
			var at int32
			if !null {
				at = c.place(v)
			} else {
				c.nulls++
			}
			c.idx = append(c.idx, at)
			c.valid = append(c.valid, !null)
			continue
		}
		if v.null || (i > colEvent && v.s == "") {
			c.valid = append(c.valid, false)
			c.nulls++
		} else {
			c.data = append(c.data, v.s...)
			c.valid = append(c.valid, true)
		}
		c.offs = append(c.offs, int32(len(c.data)))
	}
	b.ts = append(b.ts, r.ts)
	b.n++
}

// full reports whether the batch should end before its row limit.
func (b *batchBuilder) full() bool {
	for _, c := range b.str {
		if c != nil && len(c.data) >= maxBatchBytes {
			return true
		}
	}
	return false
}

// newRecord returns the rows appended so far as a record batch and starts
// a new one.
func (b *batchBuilder) newRecord() arrow.RecordBatch {
	n := b.n
	cols := make([]arrow.Array, len(b.str))
	for i, c := range b.str {
		if c == nil {
			buf := b.buffer(arrow.Int64Traits.BytesRequired(n))
			copy(arrow.Int64Traits.CastFromBytes(buf.Bytes()), b.ts)
			cols[i] = b.array(b.p.schema.Field(i).Type, n, []*memory.Buffer{nil, buf}, 0)
			continue
		}
		var bitmap *memory.Buffer
		if c.nulls > 0 {
			bitmap = b.buffer(int(bitutil.BytesForBits(int64(n))))
			bits := bitmap.Bytes()
			clear(bits)
			for j, ok := range c.valid {
				if ok {
					bitutil.SetBit(bits, j)
				}
			}
		}
		if c.dict {
			cols[i] = b.dictionaryArray(c, n, bitmap)
			continue
		}
		offs, data := b.textBuffers(c)
		cols[i] = b.array(arrow.BinaryTypes.String, n, []*memory.Buffer{bitmap, offs, data}, c.nulls)
	}
	rec := array.NewRecordBatch(b.p.schema, cols, int64(n))
	for _, a := range cols {
		a.Release()
	}
	b.reset()
	return rec
}

// dictionaryArray makes dictionary column c of a batch of n rows, with
// its validity bitmap (nil: no nulls).
func (b *batchBuilder) dictionaryArray(c *textColumn, n int, bitmap *memory.Buffer) arrow.Array {
	nv := len(c.offs) - 1
	offs, data := b.textBuffers(c)
	values := array.NewData(arrow.BinaryTypes.String, nv, []*memory.Buffer{nil, offs, data}, nil, 0, 0)
	offs.Release()
	data.Release()
	idx := b.buffer(arrow.Int32Traits.BytesRequired(n))
	copy(arrow.Int32Traits.CastFromBytes(idx.Bytes()), c.idx)
	d := array.NewDataWithDictionary(dictionaryType, n, []*memory.Buffer{bitmap, idx}, c.nulls, 0, values)
	values.Release()
	idx.Release()
	if bitmap != nil {
		bitmap.Release()
	}
	a := array.MakeFromData(d)
	d.Release()
	return a
}

// textBuffers copies column c's offsets and text (of its rows, or of a
// dictionary column's values) into buffers from the allocator.
func (b *batchBuilder) textBuffers(c *textColumn) (offs, data *memory.Buffer) {
	offs = b.buffer(arrow.Int32Traits.BytesRequired(len(c.offs)))
	copy(arrow.Int32Traits.CastFromBytes(offs.Bytes()), c.offs)
	data = b.buffer(len(c.data))
	copy(data.Bytes(), c.data)
	return offs, data
}

// buffer allocates a buffer of size bytes from the allocator.
func (b *batchBuilder) buffer(size int) *memory.Buffer {
	buf := memory.NewResizableBuffer(b.mem)
	buf.Resize(size)
	return buf
}

// array makes an array of the buffers and releases the builder's
// references to them.
func (b *batchBuilder) array(typ arrow.DataType, n int, bufs []*memory.Buffer, nulls int) arrow.Array {
	data := array.NewData(typ, n, bufs, nil, nulls, 0)
	for _, buf := range bufs {
		if buf != nil {
			buf.Release()
		}
	}
	a := array.MakeFromData(data)
	data.Release()
	return a
}

func (b *batchBuilder) reset() {
	b.n = 0
	b.ts = b.ts[:0]
	for _, c := range b.str {
		if c != nil {
			c.offs, c.data, c.valid, c.nulls = c.offs[:1], c.data[:0], c.valid[:0], 0
			if c.dict {
				for _, k := range c.used {
					c.places[k] = 0
				}
				c.idx, c.used = c.idx[:0], c.used[:0]
				clear(c.byText)
			}
		}
	}
}

// discard drops the rows appended so far.
func (b *batchBuilder) discard() { b.reset() }

// release frees the builder's slices.
func (b *batchBuilder) release() {
	b.reset()
	b.str, b.ts = nil, nil
}

// interner gives each distinct text of a column a code (0, 1, ...), so
// that the values of a Parquet dictionary are matched with the values
// met before by their code instead of their text (cell.code). It stops
// giving codes after maxCodes texts: the values after that are matched
// by their text.
type interner struct {
	codes map[string]int32
}

// maxCodes bounds an interner's codes, and so its memory and that of the
// builder's places, on a column whose values are many.
const maxCodes = 1 << 16

func newInterner() *interner { return &interner{codes: make(map[string]int32)} }

// code returns s's code plus one, or 0 when s has none.
func (n *interner) code(s string) int32 {
	if c, ok := n.codes[s]; ok {
		return c + 1
	}
	if len(n.codes) >= maxCodes {
		return 0
	}
	c := int32(len(n.codes))
	n.codes[strings.Clone(s)] = c
	return c + 1
}
