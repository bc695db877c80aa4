package ingest

import (
	"sync/atomic"

	"github.com/apache/arrow-go/v18/arrow/array"
)

// The batch readers are Arrow record readers: a caller may hand them to any
// code that takes an array.RecordReader.
var (
	_ array.RecordReader = (*Reader)(nil)
	_ array.RecordReader = (*TableReader)(nil)
	_ array.RecordReader = (*SpillReader)(nil)
)

// refCount is the reference count of a batch reader, as Arrow's
// RecordReader has it: one reference when the reader is made, one more per
// Retain; the Release that drops the last closes the reader.
type refCount struct {
	extra atomic.Int64 // references beyond the first
}

// Retain adds a reference to the reader. It may be called from any
// goroutine.
func (c *refCount) Retain() { c.extra.Add(1) }

// drop removes a reference and reports whether it was the last.
func (c *refCount) drop() bool { return c.extra.Add(-1) == -1 }
