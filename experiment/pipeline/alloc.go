package pipeline

import (
	"math/bits"
	"sync"
	"unsafe"
)

// recycler is a memory.Allocator that keeps the buffers of released record
// batches for the next batches instead of leaving them to the collector.
// The reader's batches are released one by one as the run moves on
// (Reader.Next), so without it each became garbage: on the 10M-unit
// benchmark log 0.7 GB of the 1.8 GB the analysis allocates, and the
// collector's headroom over that garbage is fresh memory the process must
// fault in (cmd/bench/BENCHMARKS.md, "Parquet toward the decode floor").
//
// Buffers come in power-of-two sizes from 64 bytes, one sync.Pool per
// size. Only a reader whose batches nothing keeps after their release may
// use it: the talliers copy what they keep (keys into the unit index,
// names and segment values as clones), and the spill copies the rows it
// writes. A reader whose rows go into maps as they are (the inventory
// pass) must not.
type recycler struct {
	pools [recyclerClasses]sync.Pool // pools[c] holds blocks of 1<<c bytes as unsafe.Pointer
}

const (
	recyclerMin     = 6  // the smallest block, 64 bytes (Arrow's alignment)
	recyclerClasses = 40 // blocks up to 1<<39 bytes; larger ones are not kept
)

// class returns the size class of a block of at least size bytes.
func recyclerClass(size int) int {
	if size <= 1<<recyclerMin {
		return recyclerMin
	}
	return bits.Len(uint(size - 1))
}

// Allocate returns a buffer of size bytes; its contents are undefined,
// unlike the Go allocator's (the batch builder writes every byte it uses).
func (a *recycler) Allocate(size int) []byte {
	c := recyclerClass(size)
	if c >= recyclerClasses {
		return make([]byte, size)
	}
	if p, ok := a.pools[c].Get().(unsafe.Pointer); ok {
		return unsafe.Slice((*byte)(p), 1<<c)[:size]
	}
	return make([]byte, size, 1<<c)
}

// Reallocate returns a buffer of size bytes that starts with b's bytes.
func (a *recycler) Reallocate(size int, b []byte) []byte {
	if size <= cap(b) {
		return b[:size]
	}
	nb := a.Allocate(size)
	copy(nb, b)
	a.Free(b)
	return nb
}

// Free keeps b for a later Allocate when it is one of the recycler's
// blocks (a power of two in size).
func (a *recycler) Free(b []byte) {
	n := cap(b)
	if n < 1<<recyclerMin || n&(n-1) != 0 {
		return
	}
	c := bits.Len(uint(n)) - 1
	if c >= recyclerClasses {
		return
	}
	a.pools[c].Put(unsafe.Pointer(unsafe.SliceData(b[:1])))
}
