package experiment

import (
	"bytes"
	"hash/maphash"

	"github.com/armtally/armtally/experiment/hugepage"
)

// unitIndex numbers unit keys densely (0, 1, ...) in order of first
// sight. It holds no pointers the collector must follow per unit: the key
// bytes live in one arena, the key boundaries in a slice of offsets, and
// the hash table is open addressing over uint64 slots, each holding the
// low 32 bits of the key's hash (high half) and the unit index plus one
// (low half; zero marks an empty slot). Collisions are resolved by
// comparing the key bytes.
type unitIndex struct {
	seed  maphash.Seed
	slots []uint64
	mask  uint32
	arena []byte          // the keys, back to back
	ends  chunked[uint64] // ends[u] is the end of key u in arena; it starts at ends[u-1] (0 for u = 0)
}

// unitIndexMinSlots is the size of a new index's table. It is small so
// that a run of thousands of experiments, most with few units, holds
// little memory for them; the table doubles as units arrive.
const unitIndexMinSlots = 16

func newUnitIndex() unitIndex { return newUnitIndexSeed(maphash.MakeSeed()) }

// newUnitIndexSeed returns an index that hashes keys with seed, so that a
// caller can hash a key once (hashKey) for several uses.
func newUnitIndexSeed(seed maphash.Seed) unitIndex {
	return unitIndex{
		seed:  seed,
		slots: make([]uint64, unitIndexMinSlots),
		mask:  unitIndexMinSlots - 1,
	}
}

// len returns the number of units.
func (x *unitIndex) len() int { return x.ends.len() }

// key returns the bytes of unit u's key; they are not to be modified.
func (x *unitIndex) key(u int32) []byte {
	var lo uint64
	if u > 0 {
		lo = *x.ends.at(int(u) - 1)
	}
	hi := *x.ends.at(int(u))
	return x.arena[lo:hi:hi]
}

// keyString returns unit u's key as a fresh string.
func (x *unitIndex) keyString(u int32) string { return string(x.key(u)) }

// compare orders units a and b by key, bytewise.
func (x *unitIndex) compare(a, b int32) int { return bytes.Compare(x.key(a), x.key(b)) }

// lookup returns the index of key and true, or, when key is new, adds it
// as unit x.len() and returns that index and false.
func (x *unitIndex) lookup(key string) (int32, bool) {
	return x.lookupHashed(key, maphash.String(x.seed, key))
}

// lookupHashed is lookup with the key's hash under the index's seed
// already computed.
func (x *unitIndex) lookupHashed(key string, hash uint64) (int32, bool) {
	h := uint32(hash)
	for i := h & x.mask; ; i = (i + 1) & x.mask {
		s := x.slots[i]
		if s == 0 {
			break
		}
		if uint32(s>>32) == h {
			u := int32(uint32(s) - 1)
			if string(x.key(u)) == key {
				return u, true
			}
		}
	}
	u := int32(x.ends.len())
	if len(x.arena)+len(key) > cap(x.arena) {
		// Double the arena: append grows a large slice by about a
		// quarter, which copied the keys about four times over and left
		// that much garbage for the collector's headroom. The new arena
		// lies in huge pages advised before the copy first touches it.
		grown := hugepage.Make[byte](cap(x.arena) + max(len(key), cap(x.arena)))
		x.arena = grown[:copy(grown, x.arena)]
	}
	x.arena = append(x.arena, key...)
	x.ends.add(uint64(len(x.arena)))
	// Keep the load at most three quarters: with the hash bits in the
	// slot, a probe rarely reads a key, and the smaller table means fewer
	// fresh pages to fault in as it grows.
	if 4*x.ends.len() > 3*len(x.slots) {
		x.grow()
	}
	x.place(uint64(h)<<32 | uint64(uint32(u)+1))
	return u, false
}

// touch reads the memory a lookup of the key with this hash will read
// first (its slot and, when the slot's hash bits match, the stored key's
// end and last byte), and returns a value only so that the reads are not
// optimised away, with the unit the slot names (-1 when its hash bits do
// not match), so that the caller can touch that unit's own memory too.
// Touching a group of keys before looking them up lets the processor wait
// for their cache misses together instead of one by one.
func (x *unitIndex) touch(hash uint64) (uint64, int32) {
	h := uint32(hash)
	s := x.slots[h&x.mask]
	if uint32(s>>32) == h {
		if u := uint32(s) - 1; int(u) < x.ends.len() {
			e := *x.ends.at(int(u))
			if e > 0 && e <= uint64(len(x.arena)) {
				e += uint64(x.arena[e-1])
			}
			return s + e, int32(u)
		}
	}
	return s, -1
}

// place puts slot s in the first free place of its probe sequence.
func (x *unitIndex) place(s uint64) {
	i := uint32(s>>32) & x.mask
	for x.slots[i] != 0 {
		i = (i + 1) & x.mask
	}
	x.slots[i] = s
}

// grow doubles the table.
func (x *unitIndex) grow() { x.resize(2 * len(x.slots)) }

// resize makes the table size slots long (a power of two, more than
// the units); the stored hash bits place each slot again without reading
// its key.
func (x *unitIndex) resize(size int) {
	old := x.slots
	x.slots = hugepage.Make[uint64](size)
	x.mask = uint32(size - 1)
	for _, s := range old {
		if s != 0 {
			x.place(s)
		}
	}
}
