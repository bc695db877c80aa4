package experiment

// chunkBits sets the size of a chunked slice's chunks: 1<<16 elements.
const chunkBits = 16

// firstChunk is the size of a chunked slice's first chunk when it is
// made. The first chunk doubles until it is a full chunk, so that a tally
// with a handful of units (one of thousands of experiments in a run)
// holds memory for a handful, not for 64Ki units.
const firstChunk = 64

// chunked is a growable slice kept in fixed-size chunks. Growing it past
// its first chunk never copies what it holds, unlike append on one slice,
// which at ten million units spent more time copying and faulting in
// fresh pages than the tally itself (the profile in
// cmd/bench/BENCHMARKS.md). Only the first chunk is copied as it grows to
// full size, so a pointer from at is valid until the next add.
type chunked[T any] struct {
	chunks [][]T
	n      int
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
			c.chunks = append(c.chunks, make([]T, 1<<chunkBits))
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
