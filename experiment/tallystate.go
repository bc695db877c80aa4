package experiment

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"hash/crc32"
	"io"
	"iter"
	"math"
	"slices"
	"strings"

	"github.com/armtally/armtally/experiment/internal/mapped"
)

// A Tallier's state can be saved after a run (WriteState) and resumed by a
// later run over more rows of the same log (ReadState before the first
// Add): the later tally equals the tally of all the rows at once, or
// Tally says it cannot (a *StaleStateError) and the caller tallies all the
// rows again.
//
// What a unit keeps. The metric events of a unit are attributed against
// its t0, its arm and the multi-arm policy, so the saved state keeps, per
// unit, the outcome of that attribution rather than the events (see
// unitCols): an exposed unit's t0, arm, flags, segment values, converted
// bits and event counts; a unit with only metric events, their number and
// the latest of their times.
//
// How a resumed tally works. ReadState loads the saved units as they are
// stored, in blocks of columns sorted by a stable 64-bit hash of the unit
// key (xxh3; ties by key bytes), a block per range of its top bits,
// without indexing them. The Tallier then tallies the new rows alone. At
// the end (finishResumed), the new units are sorted by the same hash and
// merge-joined with the saved ones, block by block on every core: a saved
// unit the new rows do not touch passes through as it is; a touched one
// takes the new exposures and metric events under the rules of a full
// run. The tally is summed from the merged blocks, which WriteState then
// writes out as they are.
//
// The merge is exact when the new rows leave each saved unit's t0 and arm
// at t0 as they were: new metric events are attributed against the saved
// t0, and a unit that now meets a second arm moves its events' counts to
// "unit excluded" when the policy leaves it out. It is not exact, and
// Tally returns a *StaleStateError, when a new exposure is earlier than a
// saved unit's t0 (its earlier metric events were not kept), ties with it
// in another arm, a unit with only metric events so far is exposed at or
// before the latest of them, or a segment dimension passes its limit of
// distinct values (the limit is judged on all the rows). The maturity
// horizon is not saved per unit: it is recomputed from t0 and the
// freshness of all rows.

// StaleStateError is a resumed tally that the saved state cannot give
// exactly: the rows read since it was saved change what it summarised.
type StaleStateError struct {
	// Reason says what changed, for the run's warning.
	Reason string
}

func (e *StaleStateError) Error() string {
	return "the saved tally state cannot absorb the new rows: " + e.Reason
}

// stateMagic starts every saved tally state; stateVersion is the layout.
//
// Layout: the magic and the version (varints and length-prefixed strings),
// the length of the header, the header and its CRC-32C (4 bytes), the
// blocks back to back, the magic again. The header holds the numbers of
// metrics and segment dimensions, the arms with their earliest exposure,
// the experiment keys, the diagnostic counters, the freshness, each
// dimension's segment values, the number of units, the block bits (a
// unit's block is the top bits of its hash), and per block its units,
// bytes and CRC-32C; a block's CRC is checked as it is decoded.
const (
	stateMagic   = "armtally-tally\n"
	stateVersion = 2
)

// ErrStateFormat is a saved tally state that cannot be read: another
// layout version, another number of metrics or segment dimensions, a cut
// or damaged file.
var ErrStateFormat = errors.New("not a usable saved tally state")

// errStateFault is a fault on reading a saved state mapped from a file
// that was cut short while in use (see mapped.Guard).
var errStateFault = fmt.Errorf("%w: its bytes could not be read", ErrStateFormat)

// savedState is a saved state as ReadState loads it: the blocks still
// encoded.
type savedState struct {
	units  int64
	bits   int
	blocks []savedBlock
	armMap []int32    // saved arm index -> the tallier's
	dicts  [][]string // per dimension, the saved segment values
}

type savedBlock struct {
	n, size int
	data    []byte
	crc     uint32
}

// maxBlockBits bounds the number of blocks (1 << bits).
const maxBlockBits = 16

// blockBits returns the block bits for n units: blocks of at most about
// 16Ki units.
func blockBits(n int64) int {
	b := 0
	for n>>b > 1<<14 && b < maxBlockBits {
		b++
	}
	return b
}

// blockOf returns the block of hash h among 1 << bits.
func blockOf(h uint64, bits int) int {
	if bits == 0 {
		return 0
	}
	return int(h >> (64 - bits))
}

// WriteState writes the tallier's state after its last Add, for ReadState
// in a later run: the counters of the rows read, the arms, experiment keys
// and segment values seen, and one record per unit (see above). It fails
// as Tally does, and with a *StaleStateError on a resumed tally that
// cannot be exact. A resumed tally is merged as it is written: Tally
// after WriteState sums the same pass.
func (t *Tallier) WriteState(w io.Writer) error {
	if err := t.checkKeys(); err != nil {
		return err
	}
	sw := &stateWriter{w: w}
	sw.str(stateMagic)
	sw.uint(stateVersion)
	if err := sw.flush(); err != nil {
		return err
	}
	var m *mergeResult
	if f := t.fin; f != nil && f.merged != nil && f.merged.inMemory {
		m = f.merged
		// Passed blocks may still be the saved state's mapped bytes.
		if err := mapped.Guard(errStateFault, func() error {
			for _, b := range m.blocks {
				sw.write(b.data)
			}
			return nil
		}); err != nil {
			return err
		}
	} else {
		var err error
		if m, err = t.merge(t.savedOrEmpty(), w); err != nil {
			if t.saved != nil {
				t.fin = &finished{stale: err}
			}
			return err
		}
		if t.saved != nil {
			t.fin = &finished{diag: m.diag, merged: m}
		}
	}
	hdr := t.stateHeader(m)
	sw.write(hdr)
	sw.write(binary.LittleEndian.AppendUint32(nil, uint32(len(hdr))))
	sw.write(binary.LittleEndian.AppendUint32(nil, crc32.Checksum(hdr, castagnoli())))
	sw.write([]byte(stateMagic)) // the end: a cut state is refused
	return sw.flush()
}

func (t *Tallier) savedOrEmpty() *savedState {
	if t.saved != nil {
		return t.saved
	}
	return &savedState{}
}

// stateHeader encodes the header of a saved state.
func (t *Tallier) stateHeader(m *mergeResult) []byte {
	sw := &stateWriter{}
	nm := len(t.spec.Metrics)
	sw.uint(uint64(nm))
	sw.uint(uint64(len(t.spec.Segments)))
	sw.uint(uint64(len(t.arms)))
	for a, name := range t.arms {
		first := int64(math.MaxInt64)
		for _, pt := range t.parts {
			first = min(first, pt.armFirst[a])
		}
		sw.str(name)
		sw.int(first)
	}
	keys := t.experimentKeys()
	sw.uint(uint64(len(keys)))
	for _, k := range keys {
		sw.str(k)
	}
	for _, v := range diagCounters(&m.diag) {
		sw.int(*v)
	}
	for _, v := range m.diag.OutsideAttribution {
		sw.int(v)
	}
	sw.bool(t.hasFresh)
	sw.int(t.fresh)
	for _, vals := range m.dicts {
		sw.uint(uint64(len(vals)))
		for _, v := range vals {
			sw.str(v)
		}
	}
	sw.uint(uint64(m.units))
	sw.uint(uint64(m.bits))
	for _, b := range m.blocks {
		sw.uint(uint64(b.n))
		sw.uint(uint64(b.size))
		sw.write(binary.LittleEndian.AppendUint32(nil, b.crc))
	}
	return sw.buf
}

// StateUnits returns the number of unit records WriteState writes.
func (t *Tallier) StateUnits() int {
	if f := t.finish(); f.merged != nil {
		return int(f.merged.units)
	}
	n := 0
	for _, pt := range t.parts {
		n += pt.state.len()
	}
	return n
}

// diagCounters lists the counters of d that a saved state keeps, in the
// order it keeps them.
func diagCounters(d *TallyDiagnostics) []*int64 {
	return []*int64{&d.RowsRead, &d.ExposureRows, &d.ExposuresOutsideWindow, &d.OtherExperimentRows,
		&d.NotMetricEvents, &d.MetricEvents, &d.AfterWindowEnd, &d.UnitNeverExposed, &d.UnitExcluded,
		&d.BeforeExposure, &d.MetricEventsInUnit, &d.AfterAsOf}
}

// ReadState loads a state written by WriteState for the same spec into a
// new Tallier, before its first Add: the rows it summarises then count as
// read. It keeps b (the state, as WriteState wrote it, which must not
// change until the tallier's last WriteState, Tally or Units) and does not
// decode its units: a damaged block is found when the tally is made (an
// error wrapping ErrStateFormat). Errors wrap ErrStateFormat.
func (t *Tallier) ReadState(b []byte) error {
	if t.diag.RowsRead > 0 || t.hasFresh || t.saved != nil {
		return errors.New("ReadState: the tallier has read rows already")
	}
	var sv *savedState
	err := mapped.Guard(errStateFault, func() (err error) {
		if sv, err = t.readState(b); err != nil {
			err = fmt.Errorf("%w: %w", ErrStateFormat, err)
		}
		return err
	})
	if err != nil {
		return err
	}
	t.saved = sv
	t.fin = nil
	return nil
}

// ExpectGrowth tells a resumed Tallier, before its first Add, that the
// rows still to come are about share times those its saved state
// summarises (the new files' bytes over the saved ones', say). Each
// partition's unit index is then sized once for the units those rows can
// hold, at most one per exposure or metric-event row at the saved rate,
// instead of doubling step by step as they arrive; nothing is reserved
// once the saved rows reach the window's end. The tally does not depend
// on it.
func (t *Tallier) ExpectGrowth(share float64) {
	if t.saved == nil || !(share > 0) || t.hasEnd && t.hasFresh && t.fresh >= t.end {
		// Once the saved rows reach the window's end, new rows make no
		// units but late ones: the index grows for those as they come.
		return
	}
	rows := share * float64(t.diag.ExposureRows+t.diag.MetricEvents)
	// A bound on what a wrong share (a tiny saved state) may reserve.
	rows = min(rows, 2*float64(t.saved.units)+1<<20)
	per := int(rows)/len(t.parts) + 1
	// Keys longer than maxKeyGuess (or a damaged block's sizes) leave the
	// first slab of keys to grow as before.
	const maxKeyGuess = 256
	var keyLen int
	// A fault here (a mapped state cut short) reserves no key slab; the
	// merge reports it.
	_ = mapped.Guard(errStateFault, func() error {
		keyLen = t.saved.keyLen(newColShape(len(t.spec.Metrics), len(t.spec.Segments)))
		return nil
	})
	keyBytes := per * min(keyLen, maxKeyGuess)
	for _, pt := range t.parts {
		if pt.units.len() > 0 {
			continue
		}
		if size := slotsFor(float64(per), math.MaxInt32+1); size > len(pt.units.slots) {
			pt.units.resize(size)
			// Written once in order here, the fresh table's pages are
			// faulted in once each, rather than first read by a lookup
			// (mapping the zero page) and then faulted again by its write.
			clear(pt.units.slots)
		}
		// The first slab of keys doubles up to a full slab as keys
		// arrive: made once, it holds the estimate (up to a full slab).
		pt.units.reserveKeys(keyBytes)
	}
}

// keyLen returns the mean key length, rounded up, of the units of the
// first few saved blocks (from their sizes and column widths, without
// decoding them), or 0 when they hold none.
func (sv *savedState) keyLen(sh colShape) int {
	var units, keys int
	for _, b := range sv.blocks[:min(len(sv.blocks), 8)] {
		if b.n == 0 || len(b.data) < blockWidths {
			continue
		}
		ws := b.data[:blockWidths]
		fixed := blockWidths + b.n*(int(ws[0])+8+int(ws[1])+sh.cb+int(ws[2])+int(ws[3])) + b.n*sh.nm*int(ws[4]) + b.n*sh.dims*int(ws[5])
		if fixed <= len(b.data) {
			units, keys = units+b.n, keys+len(b.data)-fixed
		}
	}
	if units == 0 {
		return 0
	}
	return (keys + units - 1) / units
}

func (t *Tallier) readState(b []byte) (*savedState, error) {
	prefix := 0
	for _, want := range []uint64{uint64(len(stateMagic)), stateVersion} {
		v, k := binary.Uvarint(b[prefix:])
		if k <= 0 || v != want {
			return nil, errors.New("unknown layout")
		}
		if prefix += k; want == uint64(len(stateMagic)) {
			if !bytes.HasPrefix(b[prefix:], []byte(stateMagic)) {
				return nil, errors.New("unknown layout")
			}
			prefix += len(stateMagic)
		}
	}
	tail := len(stateMagic) + 8
	if len(b) < prefix+tail || string(b[len(b)-len(stateMagic):]) != stateMagic {
		return nil, errors.New("cut short")
	}
	foot := b[len(b)-tail:]
	n := int(binary.LittleEndian.Uint32(foot))
	if n > len(b)-prefix-tail {
		return nil, errors.New("cut short")
	}
	hdr := b[len(b)-tail-n : len(b)-tail]
	if binary.LittleEndian.Uint32(foot[4:]) != crc32.Checksum(hdr, castagnoli()) {
		return nil, errors.New("damaged header")
	}
	sv, total, err := t.readHeader(&stateReader{r: bufio.NewReader(bytes.NewReader(hdr))})
	if err != nil {
		return nil, err
	}
	payload := b[prefix : len(b)-tail-n]
	if int64(len(payload)) != total {
		return nil, errors.New("the blocks do not add up")
	}
	for i := range sv.blocks {
		blk := &sv.blocks[i]
		blk.data, payload = payload[:blk.size:blk.size], payload[blk.size:]
	}
	return sv, nil
}

// readHeader reads a saved state's header into the tallier and returns
// the saved units' blocks (their data only sized) and their total bytes.
func (t *Tallier) readHeader(hr *stateReader) (*savedState, int64, error) {
	nm, dims := len(t.spec.Metrics), len(t.spec.Segments)
	if hr.uint() != uint64(nm) || hr.uint() != uint64(dims) {
		return nil, 0, errors.New("another number of metrics or segment dimensions")
	}
	sv := &savedState{}
	narms := hr.uint()
	if narms > math.MaxInt32>>unitFlagBits || hr.err != nil {
		return nil, 0, hr.fail()
	}
	for range narms {
		name, first := hr.str(), hr.int()
		a := t.arm(name)
		sv.armMap = append(sv.armMap, a)
		pt := t.parts[0]
		pt.armFirst[a] = min(pt.armFirst[a], first)
	}
	for n := hr.uint(); n > 0 && hr.err == nil; n-- {
		t.expKeys[hr.str()] = struct{}{}
	}
	for _, v := range diagCounters(&t.diag) {
		*v = hr.int()
	}
	for m := range t.diag.OutsideAttribution {
		t.diag.OutsideAttribution[m] = hr.int()
	}
	t.hasFresh, t.fresh = hr.bool(), hr.int()
	sv.dicts = make([][]string, dims)
	for d := range sv.dicts {
		for n := hr.uint(); n > 0 && hr.err == nil; n-- {
			sv.dicts[d] = append(sv.dicts[d], hr.str())
		}
	}
	sv.units = int64(hr.uint())
	sv.bits = int(hr.uint())
	if hr.err != nil || sv.bits > maxBlockBits || sv.units < 0 {
		return nil, 0, hr.fail()
	}
	var total, units int64
	for range 1 << sv.bits {
		n, size := hr.uint(), hr.uint()
		crc := hr.fixed(4)
		if hr.err != nil || n > 1<<40 || size > 1<<40 {
			return nil, 0, hr.fail()
		}
		sv.blocks = append(sv.blocks, savedBlock{n: int(n), size: int(size), crc: binary.LittleEndian.Uint32(crc)})
		total += int64(size)
		units += int64(n)
	}
	if units != sv.units || hr.err != nil {
		return nil, 0, hr.fail()
	}
	return sv, total, nil
}

// stateWriter writes the fields of a saved state: unsigned and signed
// varints, and length-prefixed bytes, gathered in a buffer written out a
// block at a time (w nil: gathered only).
type stateWriter struct {
	w   io.Writer
	buf []byte
	err error
}

// stateBlock is the size of the blocks a stateWriter writes.
const stateBlock = 1 << 16

func (s *stateWriter) spill() {
	if s.w != nil && len(s.buf) >= stateBlock {
		s.flushBuf()
	}
}

func (s *stateWriter) flushBuf() {
	if s.err == nil && len(s.buf) > 0 {
		_, s.err = s.w.Write(s.buf)
	}
	s.buf = s.buf[:0]
}

func (s *stateWriter) uint(v uint64) {
	s.buf = binary.AppendUvarint(s.buf, v)
	s.spill()
}

func (s *stateWriter) int(v int64) {
	s.buf = binary.AppendVarint(s.buf, v)
	s.spill()
}

func (s *stateWriter) bool(b bool) {
	v := byte(0)
	if b {
		v = 1
	}
	s.buf = append(s.buf, v)
	s.spill()
}

func (s *stateWriter) str(v string) {
	s.buf = binary.AppendUvarint(s.buf, uint64(len(v)))
	s.buf = append(s.buf, v...)
	s.spill()
}

// write writes b; a large b goes straight to w.
func (s *stateWriter) write(b []byte) {
	if s.w != nil && len(b) >= stateBlock {
		s.flushBuf()
		if s.err == nil {
			_, s.err = s.w.Write(b)
		}
		return
	}
	s.buf = append(s.buf, b...)
	s.spill()
}

func (s *stateWriter) flush() error {
	s.flushBuf()
	return s.err
}

// stateReader reads what a stateWriter wrote from a window of a
// bufio.Reader's buffer (Peek), consuming (Discard) only what it decoded,
// so that what follows a saved state stays for the next reader. The first
// error sticks and later reads return zero values.
type stateReader struct {
	r   *bufio.Reader
	win []byte // peeked; pos bytes of it decoded
	pos int
	err error
	buf []byte // a field longer than the window
}

// maxStateString bounds a string or byte field of a saved state, so that
// a damaged length cannot ask for gigabytes.
const maxStateString = 1 << 28

func (s *stateReader) fail() error {
	if s.err == nil {
		s.err = errors.New("damaged data")
	}
	return s.err
}

// avail makes up to n bytes available at s.win[s.pos:] and returns how
// many are.
func (s *stateReader) avail(n int) int {
	if len(s.win)-s.pos < n {
		s.r.Discard(s.pos)
		s.win, _ = s.r.Peek(s.r.Size())
		if len(s.win) < n {
			s.win, _ = s.r.Peek(len(s.win)) // all that is left
		}
		s.pos = 0
	}
	return len(s.win) - s.pos
}

// done consumes the decoded bytes from the underlying reader.
func (s *stateReader) done() {
	s.r.Discard(s.pos)
	s.win, s.pos = nil, 0
}

func (s *stateReader) uint() uint64 {
	if s.err != nil {
		return 0
	}
	s.avail(binary.MaxVarintLen64)
	v, n := binary.Uvarint(s.win[s.pos:])
	if n <= 0 {
		s.err = errors.New("cut short or damaged")
		return 0
	}
	s.pos += n
	return v
}

func (s *stateReader) int() int64 {
	u := s.uint()
	return int64(u>>1) ^ -int64(u&1) // zigzag, as binary.PutVarint
}

func (s *stateReader) bool() bool {
	b := s.fixed(1)
	return len(b) == 1 && b[0] == 1
}

// bytes returns the next length-prefixed field; it is valid until the
// next read.
func (s *stateReader) bytes() []byte { return s.fixed(s.uint()) }

// fixed returns the next n bytes; they are valid until the next read.
func (s *stateReader) fixed(n uint64) []byte {
	if s.err != nil {
		return nil
	}
	if n > maxStateString {
		s.fail()
		return nil
	}
	if int(n) <= s.r.Size() {
		if s.avail(int(n)) < int(n) {
			s.err = errors.New("cut short")
			return nil
		}
		s.pos += int(n)
		return s.win[s.pos-int(n) : s.pos]
	}
	s.done()
	s.buf = append(s.buf[:0], make([]byte, n)...)
	if _, err := io.ReadFull(s.r, s.buf); err != nil {
		s.err = fmt.Errorf("cut short: %w", err)
		return nil
	}
	return s.buf
}

func (s *stateReader) str() string { return string(s.bytes()) }

// mergedUnits returns the unit records of a resumed tally, sorted by key.
func (t *Tallier) mergedUnits(m *mergeResult) (iter.Seq[UnitRecord], error) {
	if !m.inMemory {
		// Written out as merged: merge again, into memory.
		var err error
		if m, err = t.merge(t.saved, nil); err != nil {
			return nil, err
		}
	}
	sh := newColShape(len(t.spec.Metrics), len(t.spec.Segments))
	var c unitCols
	var s blockScratch
	for _, b := range m.blocks {
		if err := decodeBlock(&c, b.data, b.n, sh, t.stateHash, &s); err != nil {
			return nil, err
		}
	}
	var recs []UnitRecord
	for i := range c.len() {
		if c.arm[i]&unitExposed == 0 {
			continue
		}
		rec := UnitRecord{Unit: string(c.key(i)), T0: c.t0[i], HasT0: true}
		t.fillMerged(&rec, m, &c, i)
		recs = append(recs, rec)
	}
	slices.SortFunc(recs, func(a, b UnitRecord) int { return strings.Compare(a.Unit, b.Unit) })
	return slices.Values(recs), nil
}

// fillMerged sets the arm, status, flags and segment values of exposed
// unit i of merged columns c.
func (t *Tallier) fillMerged(rec *UnitRecord, m *mergeResult, c *unitCols, i int) {
	nm, dims := len(t.spec.Metrics), len(t.spec.Segments)
	flags := c.arm[i]
	rec.Arm = t.arms[flags>>unitFlagBits]
	rec.MultiArm = flags&unitMulti != 0
	rec.Status = flagStatus(flags, t.spec.MultiArm)
	if dims > 0 { // nil without dimensions, as fill leaves it
		rec.Segments = make([]SegmentValue, dims)
	}
	for d := range dims {
		if v := c.segs[i*dims+d]; v != segNull {
			rec.Segments[d] = SegmentValue{Value: m.dicts[d][v], Valid: true}
		}
	}
	rec.Converted, rec.Immature = make([]bool, nm), make([]bool, nm)
	if rec.Status != StatusAnalysed {
		return
	}
	cb := (nm + 7) / 8
	for mi, mt := range t.spec.Metrics {
		rec.Converted[mi] = c.conv[i*cb+mi/8]&(1<<(mi%8)) != 0
		w := int64(mt.Window)
		rec.Immature[mi] = w > 0 && c.t0[i] > m.horizon-w
	}
}

// flagStatus applies the multi-arm policy to a unit's flags.
func flagStatus(flags uint32, policy MultiArmPolicy) UnitStatus {
	var s unitState
	if flags&unitTied != 0 {
		s.first |= stateTied
	}
	if flags&unitMulti != 0 {
		s.first |= stateMulti
	}
	return status(&s, policy)
}
