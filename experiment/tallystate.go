package experiment

import (
	"bufio"
	"encoding/binary"
	"errors"
	"fmt"
	"hash/maphash"
	"io"
	"math"
	"slices"
	"sync"
	"unsafe"
)

// A Tallier's state can be saved after a run (WriteState) and resumed by a
// later run over more rows of the same log (ReadState before the first
// Add): the later tally equals the tally of all the rows at once, or
// Tally says it cannot (a *StaleStateError) and the caller tallies all the
// rows again.
//
// What a unit keeps. The metric events of a unit are attributed against
// its t0, its arm and the multi-arm policy, so the saved state keeps, per
// unit, the outcome of that attribution rather than the events:
//
//   - an exposed unit: t0, the arm at t0, the tied and multi-arm flags, its
//     segment values, one converted flag per metric, and how many of its
//     metric events fell before t0, how many at or after it, and, per
//     metric, how many of those were past the attribution window (the
//     diagnostics those events fed);
//   - a unit with metric events but no in-window exposure: the number of
//     those events and the latest of their times.
//
// The merge is exact when the new rows leave each saved unit's t0 and arm
// at t0 as they were: new metric events are attributed against the saved
// t0, and a unit that now meets a second arm moves its events' counts to
// "unit excluded" when the policy leaves it out. It is not exact, and
// Tally returns a *StaleStateError, when a new exposure is earlier than a
// saved unit's t0 (its earlier metric events were not kept), ties with it
// in another arm, or a unit with only metric events so far is exposed at
// or before the latest of them. The maturity horizon is not saved per
// unit: it is recomputed from t0 and the freshness of all rows.

// StaleStateError is a resumed tally that the saved state cannot give
// exactly: the rows read since it was saved change what it summarised.
type StaleStateError struct {
	// Reason says what changed, for the run's warning.
	Reason string
}

func (e *StaleStateError) Error() string {
	return "the saved tally state cannot absorb the new rows: " + e.Reason
}

// baseUnit is what a saved state holds for one unit beyond its exposure
// state (unitState, segment values), which is loaded into the tally's own.
type baseUnit struct {
	before int32 // metric events before t0 (exposed) or all of them (never exposed)
	in     int32 // metric events at or after t0 (exposed)
	latest int64 // never exposed: the latest of its metric events
	flags  uint8
}

const (
	baseExposed = 1 << iota
	baseTied
	baseMulti
)

// stateMagic starts every saved tally state; stateVersion is the layout.
const (
	stateMagic   = "armtally-tally\n"
	stateVersion = 1
)

// checkBaseExposure checks an in-window exposure of saved unit u of the
// partition, in arm a at time at, before it is applied.
func (pt *tallyPart) checkBaseExposure(u, a int32, at int64) {
	if pt.stale != "" || pt.base[u].flags&baseExposed == 0 {
		return
	}
	s := pt.state.at(int(u))
	switch {
	case at < s.t0:
		pt.stale = "an exposure earlier than a unit's saved first exposure (a late row)"
	case at == s.t0 && a != s.armAtT0:
		pt.stale = "an exposure in another arm at a unit's saved first exposure (a new tie)"
	}
}

// finishBase merges the saved units of partition p into the attribution:
// their conversions, and the diagnostics of their saved events when the
// new rows changed what the policy makes of them.
func (t *Tallier) finishBase(p int, converted []bool, d *TallyDiagnostics) error {
	pt := t.parts[p]
	if pt.stale != "" {
		return &StaleStateError{Reason: pt.stale}
	}
	nm := len(t.spec.Metrics)
	for u := range pt.base {
		b := &pt.base[u]
		for m := 0; m < nm; m++ {
			converted[u*nm+m] = converted[u*nm+m] || pt.baseConv[u*nm+m]
		}
		s := pt.state.at(u)
		now := status(s, t.spec.MultiArm)
		if b.flags&baseExposed == 0 {
			if s.armAtT0 < 0 {
				continue
			}
			d.UnitNeverExposed -= int64(b.before)
			switch {
			case now != StatusAnalysed:
				d.UnitExcluded += int64(b.before)
			case b.latest < s.t0:
				d.BeforeExposure += int64(b.before)
			default:
				return &StaleStateError{Reason: "a unit with saved metric events was exposed at or before the latest of them"}
			}
			continue
		}
		was := status(&unitState{tied: b.flags&baseTied != 0, multi: b.flags&baseMulti != 0}, t.spec.MultiArm)
		if was == StatusAnalysed && now != StatusAnalysed {
			d.BeforeExposure -= int64(b.before)
			d.MetricEventsInUnit -= int64(b.in)
			d.UnitExcluded += int64(b.before) + int64(b.in)
			for m := 0; m < nm; m++ {
				d.OutsideAttribution[m] -= int64(pt.baseOut[u*nm+m])
			}
		}
	}
	return nil
}

// unitCounts are the per-unit diagnostics of one partition's units, for
// the saved state: the saved ones plus the new events'.
type unitCounts struct {
	before, in []int32
	latest     []int64
	out        []int32 // per unit and metric
}

// counts attributes partition p's events to its units as finish does and
// returns the per-unit counts.
func (t *Tallier) counts(p int) unitCounts {
	pt := t.parts[p]
	n, nm := pt.state.len(), len(t.spec.Metrics)
	c := unitCounts{before: make([]int32, n), in: make([]int32, n), latest: make([]int64, n), out: make([]int32, n*nm)}
	for u := range c.latest {
		c.latest[u] = math.MinInt64
	}
	for u, b := range pt.base {
		c.before[u], c.in[u] = b.before, b.in
		if b.flags&baseExposed == 0 {
			c.latest[u] = b.latest
		}
		copy(c.out[u*nm:(u+1)*nm], pt.baseOut[u*nm:(u+1)*nm])
	}
	for j := range pt.events.len() {
		e := pt.events.at(j)
		u := int(e.unit)
		s := pt.state.at(u)
		if s.armAtT0 < 0 {
			c.before[u]++
			c.latest[u] = max(c.latest[u], e.ts)
			continue
		}
		if e.ts < s.t0 {
			c.before[u]++
			continue
		}
		c.in[u]++
		for _, m := range t.metricsOf[e.event] {
			if w := int64(t.spec.Metrics[m].Window); w > 0 && e.ts-s.t0 >= w {
				c.out[u*nm+m]++
			}
		}
	}
	return c
}

// WriteState writes the tallier's state after its last Add, for ReadState
// in a later run: the counters of the rows read, the arms, experiment keys
// and segment values seen, and one record per unit (see above). It fails
// as Tally does, and with a *StaleStateError on a resumed tally that
// cannot be exact.
func (t *Tallier) WriteState(w io.Writer) error {
	if err := t.checkKeys(); err != nil {
		return err
	}
	f := t.finish()
	if f.stale != nil {
		return f.stale
	}
	sw := &stateWriter{w: w, buf: make([]byte, 0, 2*stateBlock)}
	sw.str(stateMagic)
	sw.uint(stateVersion)
	nm := len(t.spec.Metrics)
	sw.uint(uint64(nm))
	sw.uint(uint64(len(t.spec.Segments)))
	// The arms, with their earliest exposure over all partitions.
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
	for _, v := range diagCounters(&f.diag) {
		sw.int(*v)
	}
	for _, v := range f.diag.OutsideAttribution {
		sw.int(v)
	}
	sw.bool(t.hasFresh)
	sw.int(t.fresh)
	var units, keyBytes uint64
	for _, pt := range t.parts {
		units += uint64(pt.state.len())
		keyBytes += uint64(len(pt.units.arena))
	}
	sw.uint(units)
	sw.uint(keyBytes)
	for p := range t.parts {
		t.writeUnits(sw, p, f.converted[p], t.counts(p))
	}
	sw.str(stateMagic) // the end: a cut file is refused
	return sw.flush()
}

// writeUnits writes the unit records of partition p.
func (t *Tallier) writeUnits(sw *stateWriter, p int, converted []bool, c unitCounts) {
	pt := t.parts[p]
	nm := len(t.spec.Metrics)
	policy := t.spec.MultiArm
	for u := range pt.state.len() {
		s := pt.state.at(u)
		sw.bytes(pt.units.key(int32(u)))
		if s.armAtT0 < 0 {
			sw.byte(0)
			sw.uint(uint64(c.before[u]))
			sw.int(c.latest[u])
			continue
		}
		flags := byte(baseExposed)
		if s.tied {
			flags |= baseTied
		}
		if s.multi {
			flags |= baseMulti
		}
		sw.byte(flags)
		sw.int(s.t0)
		sw.uint(uint64(s.armAtT0))
		for d := range pt.dims {
			// 0 for null, else the length plus one and the bytes.
			if v := pt.segs[u*pt.dims+d]; v == segNull {
				sw.uint(0)
			} else {
				sw.uint(uint64(len(pt.segVals[d][v])) + 1)
				sw.write([]byte(pt.segVals[d][v]))
			}
		}
		if status(s, policy) != StatusAnalysed {
			// Its events all count as "unit excluded", whatever
			// comes: no conversions or counts to keep.
			sw.bytes(nil)
			continue
		}
		var conv []byte
		for m := 0; m < nm; m++ {
			if m%8 == 0 {
				conv = append(conv, 0)
			}
			if converted[u*nm+m] {
				conv[m/8] |= 1 << (m % 8)
			}
		}
		sw.bytes(conv)
		sw.uint(uint64(c.before[u]))
		sw.uint(uint64(c.in[u]))
		for m := 0; m < nm; m++ {
			sw.uint(uint64(c.out[u*nm+m]))
		}
	}
}

// StateUnits returns the number of unit records WriteState writes.
func (t *Tallier) StateUnits() int {
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
		&d.BeforeExposure, &d.MetricEventsInUnit}
}

// ErrStateFormat is a saved tally state that cannot be read: another
// layout version, another number of metrics or segment dimensions, a cut
// or damaged file.
var ErrStateFormat = errors.New("not a usable saved tally state")

// ReadState loads a state written by WriteState for the same spec into a
// new Tallier, before its first Add: the rows it summarises then count as
// read. Errors wrap ErrStateFormat.
func (t *Tallier) ReadState(r io.Reader) error {
	if t.diag.RowsRead > 0 || t.hasFresh {
		return errors.New("ReadState: the tallier has read rows already")
	}
	sr := &stateReader{r: bufio.NewReaderSize(r, stateBlock)}
	err := t.readState(sr)
	sr.done()
	if err != nil {
		return fmt.Errorf("%w: %w", ErrStateFormat, err)
	}
	return nil
}

func (t *Tallier) readState(sr *stateReader) error {
	if sr.str() != stateMagic || sr.uint() != stateVersion {
		return errors.New("unknown layout")
	}
	nm := len(t.spec.Metrics)
	if sr.uint() != uint64(nm) || sr.uint() != uint64(len(t.spec.Segments)) {
		return errors.New("another number of metrics or segment dimensions")
	}
	narms := sr.uint()
	if narms > math.MaxInt32 || sr.err != nil {
		return sr.fail()
	}
	arms := make([]int32, narms)
	for i := range arms {
		name, first := sr.str(), sr.int()
		arms[i] = t.arm(name)
		pt := t.parts[0]
		pt.armFirst[arms[i]] = min(pt.armFirst[arms[i]], first)
	}
	for n := sr.uint(); n > 0 && sr.err == nil; n-- {
		t.expKeys[sr.str()] = struct{}{}
	}
	for _, v := range diagCounters(&t.diag) {
		*v = sr.int()
	}
	for m := range t.diag.OutsideAttribution {
		t.diag.OutsideAttribution[m] = sr.int()
	}
	t.hasFresh, t.fresh = sr.bool(), sr.int()
	units, keyBytes := sr.uint(), sr.uint()
	if sr.err == nil && units < math.MaxInt32 && keyBytes < math.MaxInt32 {
		// Room for a share of the units a little over the even one.
		per, bytes := int(units)/len(t.parts)*9/8, int(keyBytes)/len(t.parts)*9/8
		nm := len(t.spec.Metrics)
		for _, pt := range t.parts {
			pt.units.reserve(per)
			pt.units.arena = slices.Grow(pt.units.arena, bytes)
			pt.base = slices.Grow(pt.base, per)
			pt.baseConv = slices.Grow(pt.baseConv, per*nm)
			pt.baseOut = slices.Grow(pt.baseOut, per*nm)
		}
	}
	var g loadGroup
	for i := uint64(0); i < units && sr.err == nil; {
		n := int(min(units-i, loadGroupUnits))
		if err := t.loadGroup(sr, &g, n, arms); err != nil {
			return err
		}
		i += uint64(n)
	}
	if sr.str() != stateMagic {
		return sr.fail()
	}
	for _, pt := range t.parts {
		if err := pt.segmentLimit(t.spec); err != nil {
			return err
		}
	}
	return sr.err
}

// loadGroupUnits is the number of unit records decoded before they are
// loaded, each partition's on its own goroutine.
const loadGroupUnits = 8192

// loadGroup holds decoded unit records until they are loaded; the bytes
// of their keys and segment values are copied into data.
type loadGroup struct {
	units []pendingUnit
	data  []byte
	segs  [][]byte // dims per unit; nil for null
	conv  []bool   // nm per unit
	out   []int32  // nm per unit
	byPt  [][]int32
}

// pendingUnit is one decoded unit record.
type pendingUnit struct {
	key    []byte // in a loadGroup's data (an earlier array of it when data grew)
	h      uint64
	t0     int64
	arm    int32
	b      baseUnit
	hasOut bool
	// Where its segment values, conversions and counts start in the
	// group's segs, conv and out.
	segAt, convAt, outAt int
}

// loadGroup decodes the next n unit records, then loads each partition's
// share of them on its own goroutine.
func (t *Tallier) loadGroup(sr *stateReader, g *loadGroup, n int, arms []int32) error {
	nm, dims := len(t.spec.Metrics), len(t.spec.Segments)
	g.units, g.data, g.segs, g.conv, g.out = g.units[:0], g.data[:0], g.segs[:0], g.conv[:0], g.out[:0]
	if len(g.byPt) != len(t.parts) {
		g.byPt = make([][]int32, len(t.parts))
	}
	for p := range g.byPt {
		g.byPt[p] = g.byPt[p][:0]
	}
	for i := 0; i < n && sr.err == nil; i++ {
		pu := pendingUnit{segAt: len(g.segs), convAt: len(g.conv), outAt: len(g.out)}
		key := sr.bytes()
		at := len(g.data)
		g.data = append(g.data, key...)
		pu.key = g.data[at:len(g.data):len(g.data)]
		pu.h = maphash.Bytes(t.seed, key)
		pu.b.flags = sr.byte()
		if pu.b.flags&baseExposed == 0 {
			pu.b.before, pu.b.latest = int32(sr.uint()), sr.int()
		} else {
			pu.t0 = sr.int()
			arm := sr.uint()
			if arm >= uint64(len(arms)) {
				return sr.fail()
			}
			pu.arm = arms[arm]
			for range dims {
				var v []byte
				if l := sr.uint(); l > 0 {
					at := len(g.data)
					g.data = append(g.data, sr.fixed(l-1)...)
					v = g.data[at:len(g.data):len(g.data)]
				}
				g.segs = append(g.segs, v)
			}
			conv := sr.bytes()
			for m := 0; m < nm; m++ {
				g.conv = append(g.conv, len(conv) > m/8 && conv[m/8]&(1<<(m%8)) != 0)
			}
			if pu.hasOut = len(conv) > 0; pu.hasOut {
				pu.b.before, pu.b.in = int32(sr.uint()), int32(sr.uint())
				for m := 0; m < nm; m++ {
					g.out = append(g.out, int32(sr.uint()))
				}
			}
		}
		p := t.partOf(pu.h)
		g.byPt[p] = append(g.byPt[p], int32(len(g.units)))
		g.units = append(g.units, pu)
	}
	if sr.err != nil {
		return sr.err
	}
	errs := make([]error, len(t.parts))
	var wg sync.WaitGroup
	for p := range t.parts {
		if len(g.byPt[p]) > 0 {
			wg.Go(func() { errs[p] = t.loadPart(p, g) })
		}
	}
	wg.Wait()
	return errors.Join(errs...)
}

// loadPart loads the units of a group that fall in partition p.
func (t *Tallier) loadPart(p int, g *loadGroup) error {
	pt := t.parts[p]
	nm := len(t.spec.Metrics)
	idx := g.byPt[p]
	var sink uint64
	for _, i := range idx {
		sink += pt.units.touch(g.units[i].h)
	}
	pt.sink += sink
	for _, i := range idx {
		pu := &g.units[i]
		u, ok := pt.units.lookupHashed(unsafe.String(unsafe.SliceData(pu.key), len(pu.key)), pu.h) // the index copies a new key
		if ok || int(u) != len(pt.base) {
			return fmt.Errorf("unit %q twice", pu.key)
		}
		pt.addUnit()
		segAt, convAt, outAt := pu.segAt, pu.convAt, pu.outAt
		b := pu.b
		if b.flags&baseExposed == 0 {
			pt.base = append(pt.base, b)
			pt.baseConv = append(pt.baseConv, make([]bool, nm)...)
			pt.baseOut = append(pt.baseOut, make([]int32, nm)...)
			continue
		}
		*pt.state.at(int(u)) = unitState{t0: pu.t0, armAtT0: pu.arm, firstArm: pu.arm,
			tied: b.flags&baseTied != 0, multi: b.flags&baseMulti != 0}
		for d := 0; d < pt.dims; d++ {
			if v := g.segs[segAt+d]; v != nil {
				pt.segs[int(u)*pt.dims+d] = pt.internSeg(d, unsafe.String(unsafe.SliceData(v), len(v))) // interned as a copy
			}
		}
		pt.baseConv = append(pt.baseConv, g.conv[convAt:convAt+nm]...)
		if pu.hasOut {
			pt.baseOut = append(pt.baseOut, g.out[outAt:outAt+nm]...)
		} else {
			pt.baseOut = append(pt.baseOut, make([]int32, nm)...)
		}
		pt.base = append(pt.base, b)
	}
	return nil
}

// stateWriter writes the fields of a saved state: unsigned and signed
// varints, and length-prefixed bytes, gathered in a buffer written out a
// block at a time.
type stateWriter struct {
	w   io.Writer
	buf []byte
	err error
}

// stateBlock is the size of the blocks a stateWriter writes.
const stateBlock = 1 << 16

func (s *stateWriter) spill() {
	if len(s.buf) >= stateBlock {
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

func (s *stateWriter) byte(b byte) {
	s.buf = append(s.buf, b)
	s.spill()
}

func (s *stateWriter) bool(b bool) {
	if b {
		s.byte(1)
	} else {
		s.byte(0)
	}
}

func (s *stateWriter) bytes(b []byte) {
	s.buf = binary.AppendUvarint(s.buf, uint64(len(b)))
	s.write(b)
}

func (s *stateWriter) str(v string) {
	s.buf = binary.AppendUvarint(s.buf, uint64(len(v)))
	s.buf = append(s.buf, v...)
	s.spill()
}

func (s *stateWriter) write(b []byte) {
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
const maxStateString = 1 << 24

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

func (s *stateReader) byte() byte {
	if s.err != nil {
		return 0
	}
	if s.avail(1) < 1 {
		s.err = errors.New("cut short")
		return 0
	}
	s.pos++
	return s.win[s.pos-1]
}

func (s *stateReader) bool() bool { return s.byte() == 1 }

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
