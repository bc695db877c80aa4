package experiment

import (
	"bytes"
	"hash/maphash"

	"github.com/armtally/armtally/experiment/hugepage"
)

// unitIndex numbers unit keys densely (0, 1, ...) in order of first
// sight. It holds no pointers the collector must follow per unit: the key
// bytes lie back to back in slabs, the key boundaries in a slice of
// offsets, and the hash table is open addressing over uint64 slots, each
// holding the low 32 bits of the key's hash (high half) and the unit
// index plus one (low half; zero marks an empty slot). Collisions are
// resolved by comparing the key bytes.
//
// The slabs are 1<<slabBits bytes (the first one doubles up to that size,
// so that a tally of a handful of units holds little), and growing the
// keys past a slab starts a new one instead of copying them all into a
// doubled array, which at ten million units copied about as many bytes
// as the keys hold and faulted in twice their memory. ends[u] is the end
// of key u as an offset over all slabs, with flags in its top bits: a key
// never straddles two slabs (one that would starts the next slab,
// keyAtSlab), and one longer than a slab is kept on its own in big
// (keyBig).
type unitIndex struct {
	seed     maphash.Seed
	slots    []uint64
	mask     uint32
	slabs    [][]byte
	used     uint64 // the offset of the next key's first byte
	slabBits uint
	ends     chunked[uint64] // ends[u] is the end of key u (see above); it starts at the end of key u-1 (0 for u = 0) unless flagged
	big      map[int32][]byte
	// share is the share of the input read so far, when known (see
	// Tallier.SetReadShare), and proj the units it projected at the last
	// growth; see grow.
	share float64
	proj  float64
}

const (
	// keySlabBits sets the size of a unit index's full slabs: 16 MiB,
	// whole huge pages (see hugepage.Advise).
	keySlabBits = 24
	// firstSlab is the size of a unit index's first slab when it is made.
	firstSlab = 256
	keyAtSlab = 1 << 63 // the key starts at the start of its slab
	keyBig    = 1 << 62 // the key is in big
	keyFlags  = keyAtSlab | keyBig
)

// unitIndexMinSlots is the size of a new index's table. It is small so
// that a run of thousands of experiments, most with few units, holds
// little memory for them; the table doubles as units arrive.
const unitIndexMinSlots = 16

func newUnitIndex() unitIndex { return newUnitIndexSeed(maphash.MakeSeed()) }

// newUnitIndexSeed returns an index that hashes keys with seed, so that a
// caller can hash a key once (hashKey) for several uses.
func newUnitIndexSeed(seed maphash.Seed) unitIndex {
	return unitIndex{
		seed:     seed,
		slots:    make([]uint64, unitIndexMinSlots),
		mask:     unitIndexMinSlots - 1,
		slabBits: keySlabBits,
	}
}

// len returns the number of units.
func (x *unitIndex) len() int { return x.ends.len() }

// key returns the bytes of unit u's key; they are not to be modified.
func (x *unitIndex) key(u int32) []byte {
	e := *x.ends.at(int(u))
	if e&keyBig != 0 {
		return x.big[u]
	}
	hi := e &^ keyFlags
	var lo uint64
	switch {
	case e&keyAtSlab != 0:
		lo = (hi - 1) >> x.slabBits << x.slabBits
	case u > 0:
		lo = *x.ends.at(int(u) - 1) &^ keyFlags
	}
	if lo == hi {
		return nil
	}
	off := lo & (1<<x.slabBits - 1)
	return x.slabs[lo>>x.slabBits][off : off+hi-lo : off+hi-lo]
}

// keyString returns unit u's key as a fresh string.
func (x *unitIndex) keyString(u int32) string { return string(x.key(u)) }

// compare orders units a and b by key, bytewise.
func (x *unitIndex) compare(a, b int32) int { return bytes.Compare(x.key(a), x.key(b)) }

// addKey stores key as the key of unit u, the next unit.
func (x *unitIndex) addKey(u int32, key string) {
	n := uint64(len(key))
	full := uint64(1) << x.slabBits
	switch {
	case n > full:
		if x.big == nil {
			x.big = make(map[int32][]byte)
		}
		x.big[u] = []byte(key)
		x.ends.add(x.used | keyBig)
		return
	case n == 0:
		x.ends.add(x.used)
		return
	}
	var flags uint64
	i, off := x.used>>x.slabBits, x.used&(full-1)
	if off+n > full {
		// Past the end of this slab's full size: the key starts the next.
		i, off, flags = i+1, 0, keyAtSlab
	}
	switch {
	case int(i) == len(x.slabs) && i == 0:
		x.slabs = append(x.slabs, advisedBytes(min(full, max(firstSlab, ceilPow2(n)))))
	case int(i) == len(x.slabs):
		x.slabs = append(x.slabs, advisedBytes(full))
	case off+n > uint64(len(x.slabs[i])):
		// The first slab, not yet full size: doubled, copied.
		grown := advisedBytes(min(full, max(2*uint64(len(x.slabs[i])), ceilPow2(off+n))))
		copy(grown, x.slabs[i][:off])
		x.slabs[i] = grown
	}
	copy(x.slabs[i][off:], key)
	x.used = i<<x.slabBits + off + n
	x.ends.add(x.used | flags)
}

// reserveKeys makes the first slab hold about n bytes of keys (at most a
// full slab) before any key is added, so that it does not double its way
// there; see Tallier.ExpectGrowth.
func (x *unitIndex) reserveKeys(n int) {
	if len(x.slabs) > 0 || n <= 0 {
		return
	}
	x.slabs = [][]byte{advisedBytes(min(uint64(1)<<x.slabBits, ceilPow2(uint64(n))))}
}

// advisedBytes returns n zeroed bytes, advised for huge pages in place
// from 4 MiB on (the whole 2 MiB pages inside them; see chunked.next for
// why not hugepage.Make).
func advisedBytes(n uint64) []byte {
	b := make([]byte, n)
	if n >= 4<<20 {
		hugepage.Advise(b)
	}
	return b
}

// ceilPow2 returns the least power of two at least n (n >= 1).
func ceilPow2(n uint64) uint64 {
	p := uint64(1)
	for p < n {
		p <<= 1
	}
	return p
}

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
	x.addKey(u, key)
	// Keep the load at most three quarters: with the hash bits in the
	// slot, a probe rarely reads a key, and the smaller table means fewer
	// fresh pages to fault in as it grows.
	if 4*x.ends.len() > 3*len(x.slots) {
		x.grow()
	}
	x.place(uint64(h)<<32 | uint64(uint32(u)+1))
	return u, false
}

// slotOf, unitOf and keyTouch read the memory that a lookup of a key
// with a given hash reads first: its slot and, when the slot's hash bits
// match, the unit's key end and last byte. Touching a group of keys
// before looking them up lets the processor wait for their cache misses
// together instead of one by one; Tallier.addPart does it in two stages
// over a group (all the slots, then the units they name), so that the
// loads of each stage do not wait on one another.

// slotOf reads the first slot of the hash's probe sequence.
func (x *unitIndex) slotOf(hash uint64) uint64 { return x.slots[uint32(hash)&x.mask] }

// unitOf returns the unit that slot s names when its hash bits are the
// hash's, or -1.
func (x *unitIndex) unitOf(s, hash uint64) int32 {
	if s == 0 || uint32(s>>32) != uint32(hash) {
		return -1
	}
	if u := uint32(s) - 1; int(u) < x.ends.len() {
		return int32(u)
	}
	return -1
}

// keyTouch reads unit u's key end and last byte, as a lookup comparing
// keys does, and returns a value made of them.
func (x *unitIndex) keyTouch(u int32) uint64 {
	e := *x.ends.at(int(u))
	if hi := e &^ keyFlags; e&keyBig == 0 && hi > 0 && hi <= x.used {
		p := hi - 1
		e += uint64(x.slabs[p>>x.slabBits][p&(1<<x.slabBits-1)])
	}
	return e
}

// place puts slot s in the first free place of its probe sequence.
func (x *unitIndex) place(s uint64) {
	i := uint32(s>>32) & x.mask
	for x.slots[i] != 0 {
		i = (i + 1) & x.mask
	}
	x.slots[i] = s
}

// grow doubles the table, or, with the share of the input read known,
// grows it toward the units that share projects (the units so far over
// the share), in one step instead of several doublings: each re-places
// every slot in fresh memory. It takes that step only when the projection
// agrees within projTolerance with the one at the last growth, so that
// units arriving faster or slower as the input goes on (a log in time
// order) fall back to doubling; the step is at most maxGrowStep times the
// table. A wrong projection costs memory, never a different tally.
func (x *unitIndex) grow() {
	size := 2 * len(x.slots)
	if x.share > 0 && x.share < 1 && len(x.slots) >= minProjectedSlots {
		proj := float64(x.len()) / x.share
		if prev := x.proj; prev > 0 && proj <= prev*projTolerance && proj*projTolerance >= prev {
			size = max(size, slotsFor(proj*projMargin, maxGrowStep*len(x.slots)))
		}
		x.proj = proj
	}
	x.resize(size)
}

const (
	// minProjectedSlots is the least table that grows by projection.
	minProjectedSlots = 1 << 16
	// projTolerance is how far apart two projections may be and agree.
	projTolerance = 1.25
	// projMargin is the room kept above a projection.
	projMargin = 1.1
	// maxGrowStep bounds one growth by projection.
	maxGrowStep = 8
)

// slotsFor returns the table size (a power of two) that holds n units at
// a load of at most three quarters, or limit (a power of two) if that is
// less.
func slotsFor(n float64, limit int) int {
	size := unitIndexMinSlots
	for size < limit && 3*float64(size) < 4*n {
		size *= 2
	}
	return size
}

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
