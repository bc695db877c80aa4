package ingest

import (
	"sync/atomic"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
)

// The batch readers are Arrow record readers: a caller may hand them to any
// code that takes an array.RecordReader.
var (
	_ array.RecordReader = (*Reader)(nil)
	_ array.RecordReader = (*TableReader)(nil)
	_ array.RecordReader = (*SpillReader)(nil)
)

// batchState is what the batch readers share: the current batch, the error
// that stopped the reader, and the reference count of Arrow's RecordReader
// (one reference when the reader is made, one more per Retain; the Release
// that drops the last closes the reader).
type batchState struct {
	rec    arrow.RecordBatch
	err    error
	closed bool
	extra  atomic.Int64 // references beyond the first
	close  func() error // the reader's Close
}

// RecordBatch returns the current record batch. It is valid until the next
// call to Next or Close; the reader releases it. Call the batch's Retain
// to keep it longer.
func (b *batchState) RecordBatch() arrow.RecordBatch { return b.rec }

// Record returns the current record batch.
//
// Deprecated: Use RecordBatch; Record is there for array.RecordReader.
func (b *batchState) Record() arrow.RecordBatch { return b.rec }

// Err returns the error that stopped the reader, or nil at a clean end.
func (b *batchState) Err() error { return b.err }

// Retain adds a reference to the reader. It may be called from any
// goroutine.
func (b *batchState) Retain() { b.extra.Add(1) }

// Release drops a reference to the reader; the last closes it (see
// Retain).
func (b *batchState) Release() {
	if b.extra.Add(-1) == -1 {
		b.close()
	}
}

// advance starts a call to Next: it releases the current batch and reports
// whether the reader may go on (it is neither stopped nor closed).
func (b *batchState) advance() bool {
	b.dropBatch()
	return b.err == nil && !b.closed
}

// shut starts a call to Close: it reports false when the reader is closed
// already, and otherwise marks it closed and releases the current batch.
func (b *batchState) shut() bool {
	if b.closed {
		return false
	}
	b.closed = true
	b.dropBatch()
	return true
}

// dropBatch releases the current batch, if any.
func (b *batchState) dropBatch() {
	if b.rec != nil {
		b.rec.Release()
		b.rec = nil
	}
}
