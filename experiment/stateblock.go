package experiment

import (
	"encoding/binary"
	"errors"
	"hash/crc32"
	"math"
	"slices"
)

// unitCols holds unit records column by column, in the order of a saved
// state (by stable key hash, then key bytes): the form in which a block
// of a saved state is decoded, merged and encoded again.
//
// An exposed unit has the unitExposed flag, its t0, arm at t0 and tied
// and multi-arm flags, its segment values and, when the multi-arm policy
// analyses it, one converted bit per metric (conv) and its metric events
// before t0 (before), at or after it (in) and, per metric, past the
// attribution window (out). A unit with metric events but no in-window
// exposure keeps their number in before and the latest of their times in
// t0.
type unitCols struct {
	hash   []uint64
	keyEnd []uint32 // end of key i in keys
	keys   []byte
	t0     []int64
	arm    []uint32 // arm index << unitFlagBits | flags
	conv   []byte   // cb per unit
	before []uint32
	in     []uint32
	out    []uint32 // nm per unit
	segs   []int32  // dims per unit; segNull for null
}

const (
	unitExposed = 1 << iota
	unitTied
	unitMulti
	unitFlagBits = 3
)

// colShape is the number of metrics and segment dimensions of a tally,
// which sizes the per-unit columns.
type colShape struct{ nm, cb, dims int }

func newColShape(nm, dims int) colShape { return colShape{nm: nm, cb: (nm + 7) / 8, dims: dims} }

func (c *unitCols) len() int { return len(c.t0) }

func (c *unitCols) reset() {
	c.hash, c.keyEnd, c.keys, c.t0, c.arm = c.hash[:0], c.keyEnd[:0], c.keys[:0], c.t0[:0], c.arm[:0]
	c.conv, c.before, c.in, c.out, c.segs = c.conv[:0], c.before[:0], c.in[:0], c.out[:0], c.segs[:0]
}

func (c *unitCols) key(i int) []byte {
	lo := uint32(0)
	if i > 0 {
		lo = c.keyEnd[i-1]
	}
	return c.keys[lo:c.keyEnd[i]]
}

// appendRange appends units i to j-1 of src.
func (c *unitCols) appendRange(src *unitCols, i, j int, sh colShape) {
	if i >= j {
		return
	}
	lo := uint32(0)
	if i > 0 {
		lo = src.keyEnd[i-1]
	}
	shift := uint32(len(c.keys)) - lo
	for _, e := range src.keyEnd[i:j] {
		c.keyEnd = append(c.keyEnd, e+shift)
	}
	c.keys = append(c.keys, src.keys[lo:src.keyEnd[j-1]]...)
	c.hash = append(c.hash, src.hash[i:j]...)
	c.t0 = append(c.t0, src.t0[i:j]...)
	c.arm = append(c.arm, src.arm[i:j]...)
	c.conv = append(c.conv, src.conv[i*sh.cb:j*sh.cb]...)
	c.before = append(c.before, src.before[i:j]...)
	c.in = append(c.in, src.in[i:j]...)
	c.out = append(c.out, src.out[i*sh.nm:j*sh.nm]...)
	c.segs = append(c.segs, src.segs[i*sh.dims:j*sh.dims]...)
}

// Block layout: the widths in bytes (1, 2 or 4) of the key lengths, the
// arm-and-flags column, before, in, out and the segment values (stored
// plus one, so that null is 0), then the columns, each fixed-width: key
// lengths, t0 (8 bytes), arm and flags, conv, before, in, out, segment
// values, then the key bytes. Integers are little-endian.
const blockWidths = 6

// width returns the bytes needed to hold v: 1, 2 or 4.
func width(v uint32) int {
	switch {
	case v <= math.MaxUint8:
		return 1
	case v <= math.MaxUint16:
		return 2
	}
	return 4
}

func maxOf(vs []uint32) uint32 {
	var m uint32
	for _, v := range vs {
		m = max(m, v)
	}
	return m
}

// putCol appends vs to dst, w bytes a value. The values are stored
// through an index into room made first: appending them one by one
// checked the capacity per value.
func putCol(dst []byte, vs []uint32, w int) []byte {
	at := len(dst)
	dst = slices.Grow(dst, w*len(vs))[:at+w*len(vs)]
	out := dst[at:]
	switch w {
	case 1:
		out = out[:len(vs)]
		for i, v := range vs {
			out[i] = byte(v)
		}
	case 2:
		for i, v := range vs {
			binary.LittleEndian.PutUint16(out[2*i:], uint16(v))
		}
	default:
		for i, v := range vs {
			binary.LittleEndian.PutUint32(out[4*i:], v)
		}
	}
	return dst
}

// getCol appends the n values of w bytes each at the start of src to dst.
func getCol(dst []uint32, src []byte, n, w int) []uint32 {
	at := len(dst)
	dst = slices.Grow(dst, n)[:at+n]
	out := dst[at:]
	switch w {
	case 1:
		for i, b := range src[:len(out)] {
			out[i] = uint32(b)
		}
	case 2:
		for i := range out {
			out[i] = uint32(binary.LittleEndian.Uint16(src[2*i:]))
		}
	default:
		for i := range out {
			out[i] = binary.LittleEndian.Uint32(src[4*i:])
		}
	}
	return dst
}

// blockScratch is reused between the blocks a worker encodes.
type blockScratch struct{ lens, segs []uint32 }

// encodeBlock appends units i to j-1 of c to dst as one block.
func encodeBlock(dst []byte, c *unitCols, i, j int, sh colShape, s *blockScratch) []byte {
	s.lens, s.segs = s.lens[:0], s.segs[:0]
	prev := uint32(0)
	if i > 0 {
		prev = c.keyEnd[i-1]
	}
	keysLo := prev
	for _, e := range c.keyEnd[i:j] {
		s.lens = append(s.lens, e-prev)
		prev = e
	}
	for _, v := range c.segs[i*sh.dims : j*sh.dims] {
		s.segs = append(s.segs, uint32(v+1))
	}
	arm, before, in, out := c.arm[i:j], c.before[i:j], c.in[i:j], c.out[i*sh.nm:j*sh.nm]
	ws := [blockWidths]int{width(maxOf(s.lens)), width(maxOf(arm)), width(maxOf(before)), width(maxOf(in)), width(maxOf(out)), width(maxOf(s.segs))}
	for _, w := range ws {
		dst = append(dst, byte(w))
	}
	dst = putCol(dst, s.lens, ws[0])
	at := len(dst)
	dst = slices.Grow(dst, 8*(j-i))[:at+8*(j-i)]
	for k, t := range c.t0[i:j] {
		binary.LittleEndian.PutUint64(dst[at+8*k:], uint64(t))
	}
	dst = putCol(dst, arm, ws[1])
	dst = append(dst, c.conv[i*sh.cb:j*sh.cb]...)
	dst = putCol(dst, before, ws[2])
	dst = putCol(dst, in, ws[3])
	dst = putCol(dst, out, ws[4])
	dst = putCol(dst, s.segs, ws[5])
	return append(dst, c.keys[keysLo:prev]...)
}

// The faults of a saved block.
var (
	errBlock    = errors.New("damaged unit block")
	errChecksum = errors.New("checksum mismatch")
	errOrder    = errors.New("units out of order (another hash function?)")
)

// decodeBlock appends the n units of block b to c, with their stable
// hashes (hash; nil: neither the keys nor their hashes). It fails on a
// block whose size does not add up.
func decodeBlock(c *unitCols, b []byte, n int, sh colShape, hash func([]byte) uint64, s *blockScratch) error {
	if len(b) < blockWidths {
		return errBlock
	}
	var ws [blockWidths]int
	for k := range ws {
		ws[k] = int(b[k])
		if ws[k] != 1 && ws[k] != 2 && ws[k] != 4 {
			return errBlock
		}
	}
	fixed := n*(ws[0]+8+ws[1]+sh.cb+ws[2]+ws[3]) + n*sh.nm*ws[4] + n*sh.dims*ws[5]
	if n < 0 || len(b)-blockWidths < fixed {
		return errBlock
	}
	p := b[blockWidths:]
	take := func(k int) []byte {
		h := p[:k]
		p = p[k:]
		return h
	}
	s.lens = getCol(s.lens[:0], take(n*ws[0]), n, ws[0])
	t0, at := take(8*n), len(c.t0)
	c.t0 = slices.Grow(c.t0, n)[:at+n]
	for k := range c.t0[at:] {
		c.t0[at+k] = int64(binary.LittleEndian.Uint64(t0[8*k:]))
	}
	c.arm = getCol(c.arm, take(n*ws[1]), n, ws[1])
	c.conv = append(c.conv, take(n*sh.cb)...)
	c.before = getCol(c.before, take(n*ws[2]), n, ws[2])
	c.in = getCol(c.in, take(n*ws[3]), n, ws[3])
	c.out = getCol(c.out, take(n*sh.nm*ws[4]), n*sh.nm, ws[4])
	s.segs = getCol(s.segs[:0], take(n*sh.dims*ws[5]), n*sh.dims, ws[5])
	for _, v := range s.segs {
		c.segs = append(c.segs, int32(v)-1)
	}
	var total uint64
	for _, l := range s.lens {
		total += uint64(l)
	}
	if total != uint64(len(p)) || uint64(len(c.keys))+total > math.MaxUint32 {
		return errBlock
	}
	if hash == nil {
		return nil
	}
	lo := len(c.keys)
	c.keys = append(c.keys, p...)
	for _, l := range s.lens {
		hi := lo + int(l)
		c.keyEnd = append(c.keyEnd, uint32(hi))
		c.hash = append(c.hash, hash(c.keys[lo:hi]))
		lo = hi
	}
	return nil
}

// castagnoli is the CRC-32C table (hardware accelerated on amd64 and
// arm64).
func castagnoli() *crc32.Table { return crc32.MakeTable(crc32.Castagnoli) }
