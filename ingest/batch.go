package ingest

import (
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

// textColumn is one utf8 column being built.
type textColumn struct {
	offs  []int32 // n+1 offsets into data
	data  []byte
	valid []bool
	nulls int
}

// maxBatchBytes bounds the text bytes of one column in a batch, well below
// the 2 GiB that Arrow's int32 offsets allow; full reports when a batch
// should end early.
const maxBatchBytes = 1 << 30

func newBatchBuilder(mem memory.Allocator, p *plan) *batchBuilder {
	b := &batchBuilder{p: p, mem: mem, str: make([]*textColumn, len(p.logical))}
	for i := range p.logical {
		if i != colTS {
			b.str[i] = &textColumn{offs: []int32{0}}
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
		offs := b.buffer(arrow.Int32Traits.BytesRequired(n + 1))
		copy(arrow.Int32Traits.CastFromBytes(offs.Bytes()), c.offs)
		data := b.buffer(len(c.data))
		copy(data.Bytes(), c.data)
		cols[i] = b.array(arrow.BinaryTypes.String, n, []*memory.Buffer{bitmap, offs, data}, c.nulls)
	}
	rec := array.NewRecordBatch(b.p.schema, cols, int64(n))
	for _, a := range cols {
		a.Release()
	}
	b.reset()
	return rec
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
