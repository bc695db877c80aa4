package experiment

import (
	"unsafe"

	"github.com/armtally/armtally/experiment/hugepage"
)

// chunkBits sets the size of a chunked slice's chunks: 1<<16 elements.
const chunkBits = 16

// firstChunk is the size of a chunked slice's first chunk when it is
// made. The first chunk doubles until it is a full chunk, so that a tally
// with a handful of units (one of thousands of experiments in a run)
// holds memory for a handful, not for 64Ki units.
const firstChunk = 64

// slabBytes is about the most memory one allocation of full chunks
// takes (see chunked.next).
const slabBytes = 16 << 20

// chunked is a growable slice kept in fixed-size chunks. Growing it past
// its first chunk never copies what it holds, unlike append on one slice,
// which at ten million units spent more time copying and faulting in
// fresh pages than the tally itself (the profile in
// cmd/bench/BENCHMARKS.md). Only the first chunk is copied as it grows to
// full size, so a pointer from at is valid until the next add.
type chunked[T any] struct {
	chunks [][]T
	n      int
	// spare is the rest of the last slab, the full chunks made in one
	// allocation and not used yet.
	spare []T
}

// len returns the number of elements.
func (c *chunked[T]) len() int { return c.n }

// at returns a pointer to element i, which must be below len.
func (c *chunked[T]) at(i int) *T {
	return &c.chunks[i>>chunkBits][i&(1<<chunkBits-1)]
}

// add appends v.
func (c *chunked[T]) add(v T) {
	switch {
	case c.n >= 1<<chunkBits:
		if c.n&(1<<chunkBits-1) == 0 {
			c.chunks = append(c.chunks, c.next())
		}
	case c.n == 0:
		c.chunks = [][]T{make([]T, firstChunk)}
	case c.n == len(c.chunks[0]):
		grown := make([]T, 2*c.n)
		copy(grown, c.chunks[0])
		c.chunks[0] = grown
	}
	*c.at(c.n) = v
	c.n++
}

// next returns a fresh full chunk. Full chunks are cut from slabs of
// several chunks, as many as the slice has (doubling what it holds, like
// append) up to about slabBytes, so that a large slice's memory comes in
// pieces of several huge pages, advised as such (hugepage.Advise): one chunk
// of a few hundred KiB would hold no whole 2 MiB page. (Slabs are not cut
// from hugepage.Make's aligned memory: its slack, about 4 MiB a slab, counts
// in the live heap and raised peak memory by 7% at 10M units.)
func (c *chunked[T]) next() []T {
	const size = 1 << chunkBits
	if len(c.spare) < size {
		var zero T
		perSlab := max(1, slabBytes/(size*int(unsafe.Sizeof(zero))))
		c.spare = make([]T, min(len(c.chunks), perSlab)*size)
		hugepage.Advise(c.spare)
	}
	chunk := c.spare[:size:size]
	c.spare = c.spare[size:]
	return chunk
}
