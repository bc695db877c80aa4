package experiment

// chunkBits sets the size of a chunked slice's chunks: 1<<16 elements.
const chunkBits = 16

// chunked is a growable slice kept in fixed-size chunks. Growing it never
// copies what it holds, unlike append on one slice, which at ten million
// units spent more time copying and faulting in fresh pages than the
// tally itself (the profile in cmd/bench/BENCHMARKS.md). Pointers from at
// stay valid as it grows.
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
	if c.n&(1<<chunkBits-1) == 0 {
		c.chunks = append(c.chunks, make([]T, 1<<chunkBits))
	}
	*c.at(c.n) = v
	c.n++
}
