package experiment

import (
	"bytes"
	"cmp"
	"encoding/binary"
	"fmt"
	"hash/crc32"
	"io"
	"math"
	"runtime"
	"slices"
	"sync"
	"sync/atomic"

	"github.com/armtally/armtally/experiment/internal/mapped"
)

// mergeResult is a tally's units merged with a saved state: the blocks of
// the new state, the counters and the sums of the unit records.
type mergeResult struct {
	diag    TallyDiagnostics
	units   int64
	bits    int
	blocks  []savedBlock
	dicts   [][]string
	sums    *groupSums
	horizon int64
	// inMemory: the blocks' data is here (not written out as merged).
	inMemory bool
}

// finishResumed merges a resumed tally's new units with its saved state.
// An error (stale, or a damaged block wrapping ErrStateFormat) is kept
// in stale.
func (t *Tallier) finishResumed() *finished {
	m, err := t.merge(t.saved, nil)
	if err != nil {
		return &finished{stale: err}
	}
	return &finished{diag: m.diag, merged: m}
}

// mergeCtx is one merge of the tallier's units with a saved state.
type mergeCtx struct {
	t       *Tallier
	sv      *savedState
	sh      colShape
	resumed bool
	horizon int64
	dicts   [][]string
	news    []newPart
	// The merge runs one task per range of the top taskBits bits of the
	// hash (a saved block, when there are saved units); each writes the
	// new state's blocks of its range (outBits).
	taskBits, outBits int
	refs              []newRef
	refAt             []int // task k's refs are refs[refAt[k]:refAt[k+1]]
	blocks            []savedBlock
	dense             int // the size of a dense groupSums, 0 for a map
	// w receives the encoded blocks in order as tasks finish (nil: they
	// are kept in blocks); written counts the tasks written.
	w       io.Writer
	mu      sync.Mutex
	cond    *sync.Cond
	written int
	failed  bool
	werr    error
}

// newPart is what the merge needs of one partition's new units: how many
// fall in each task (then where the next goes in refs), their metric
// events grouped by unit, and the merged index of each of the
// partition's segment values.
type newPart struct {
	next   []int
	evAt   []int32 // unit u's events are evs[evAt[u]:evAt[u+1]]
	evs    []metricEvent
	segMap [][]int32
}

// newRef is one new unit: its hash, partition and index there.
type newRef struct {
	h    uint64
	p, u int32
}

// mergeWorker is one goroutine's scratch and sums.
type mergeWorker struct {
	in, out unitCols
	bs      blockScratch
	enc     []byte
	attr    TallyDiagnostics // the changes to the counters of the attribution
	sums    *groupSums
	sink    uint64   // see touch
	ends    []int    // sortRefs' buckets
	sorted  []newRef // sortRefs' scratch
}

// merge merges the tallier's units with saved state sv (empty for a
// tally that was not resumed), writing the new state's blocks to w as
// they are made (w nil: keeping them).
func (t *Tallier) merge(sv *savedState, w io.Writer) (*mergeResult, error) {
	nm, dims := len(t.spec.Metrics), len(t.spec.Segments)
	mc := &mergeCtx{t: t, sv: sv, sh: newColShape(nm, dims), resumed: t.saved != nil, horizon: t.fresh, w: w}
	mc.cond = sync.NewCond(&mc.mu)
	if t.hasEnd {
		mc.horizon = t.end
	}
	if err := mc.buildDicts(); err != nil {
		return nil, err
	}
	var newUnits int64
	for _, pt := range t.parts {
		newUnits += int64(pt.state.len())
	}
	mc.outBits = max(sv.bits, blockBits(sv.units+newUnits))
	mc.taskBits = mc.outBits
	if sv.units > 0 {
		mc.taskBits = sv.bits
	}
	mc.prepareNew()
	mc.bucket()
	if g := len(t.arms) * 6 << (2 * nm); dims == 0 && nm <= 8 && g <= 1<<16 {
		mc.dense = g
	}
	workers, err := mc.run()
	if err != nil {
		return nil, err
	}
	m := &mergeResult{diag: t.diag, bits: mc.outBits, blocks: mc.blocks, dicts: mc.dicts, horizon: mc.horizon,
		sums: newGroupSums(mc.dense), inMemory: w == nil}
	d := &m.diag
	d.OutsideAttribution = slices.Clone(t.diag.OutsideAttribution)
	for _, w := range workers {
		if err := sumDiag(d, w.attr, nm); err != nil {
			return nil, err
		}
		m.sums.add(w.sums)
	}
	for _, b := range m.blocks {
		m.units += int64(b.n)
	}
	return m, nil
}

// buildDicts makes the merged segment values of each dimension: the
// saved ones, then those of the new rows, and each partition's map to
// them. A resumed tally with a dimension past its limit is stale: the
// limit is judged on all the rows, by a full run.
func (mc *mergeCtx) buildDicts() error {
	t := mc.t
	mc.dicts = make([][]string, mc.sh.dims)
	mc.news = make([]newPart, len(t.parts))
	for d := range mc.dicts {
		index := make(map[string]int32)
		if d < len(mc.sv.dicts) {
			mc.dicts[d] = slices.Clone(mc.sv.dicts[d])
		}
		for i, v := range mc.dicts[d] {
			index[v] = int32(i)
		}
		for p, pt := range t.parts {
			if d == 0 {
				mc.news[p].segMap = make([][]int32, mc.sh.dims)
			}
			for _, v := range pt.segVals[d] {
				i, ok := index[v]
				if !ok {
					i = int32(len(mc.dicts[d]))
					index[v] = i
					mc.dicts[d] = append(mc.dicts[d], v)
				}
				mc.news[p].segMap[d] = append(mc.news[p].segMap[d], i)
			}
		}
		if mc.resumed && len(mc.dicts[d]) > t.spec.maxSegmentValues() {
			return &StaleStateError{Reason: fmt.Sprintf("segment %q has more distinct values than its limit", t.spec.Segments[d])}
		}
	}
	return nil
}

// prepareNew counts each partition's units per task (by their stable
// hashes) and groups their metric events by unit, a partition per
// goroutine.
func (mc *mergeCtx) prepareNew() {
	t := mc.t
	var wg sync.WaitGroup
	for p, pt := range t.parts {
		wg.Go(func() {
			np := &mc.news[p]
			n := pt.state.len()
			np.next = make([]int, 1<<mc.taskBits)
			for u := range n {
				np.next[blockOf(t.stateHash(pt.units.key(int32(u))), mc.taskBits)]++
			}
			// evAt[u] counts, then ends, then (placing the events from
			// the last) starts unit u's events: no copy of it is needed.
			np.evAt = make([]int32, n+1)
			for j := range pt.events.len() {
				np.evAt[pt.events.at(j).unit]++
			}
			for u := range n {
				np.evAt[u+1] += np.evAt[u]
			}
			np.evs = make([]metricEvent, pt.events.len())
			for j := pt.events.len() - 1; j >= 0; j-- {
				e := pt.events.at(j)
				np.evAt[e.unit]--
				np.evs[np.evAt[e.unit]] = *e
			}
		})
	}
	wg.Wait()
}

// bucket sorts the new units into their tasks: task k's go to
// refs[refAt[k]:refAt[k+1]], each partition's after the previous
// partition's, and the partitions place theirs at once, hashing their
// keys again rather than keeping the hashes between the two passes.
func (mc *mergeCtx) bucket() {
	tasks := 1 << mc.taskBits
	mc.refAt = make([]int, tasks+1)
	at := 0
	for k := range tasks {
		mc.refAt[k] = at
		for p := range mc.news {
			c := mc.news[p].next[k]
			mc.news[p].next[k] = at
			at += c
		}
	}
	mc.refAt[tasks] = at
	mc.refs = make([]newRef, at)
	var wg sync.WaitGroup
	for p, pt := range mc.t.parts {
		wg.Go(func() {
			next := mc.news[p].next
			for u := range pt.state.len() {
				h := mc.t.stateHash(pt.units.key(int32(u)))
				k := blockOf(h, mc.taskBits)
				mc.refs[next[k]] = newRef{h: h, p: int32(p), u: int32(u)}
				next[k]++
			}
		})
	}
	wg.Wait()
}

// run runs the tasks on every core and returns the workers, or the error
// of the first task that failed.
func (mc *mergeCtx) run() ([]*mergeWorker, error) {
	tasks := 1 << mc.taskBits
	mc.blocks = make([]savedBlock, 1<<mc.outBits)
	errs := make([]error, tasks)
	workers := make([]*mergeWorker, min(runtime.GOMAXPROCS(0), tasks))
	var next atomic.Int64
	var failed atomic.Bool
	var wg sync.WaitGroup
	for i := range workers {
		w := &mergeWorker{sums: newGroupSums(mc.dense), attr: TallyDiagnostics{OutsideAttribution: make([]int64, mc.sh.nm)}}
		workers[i] = w
		wg.Go(func() {
			for !failed.Load() {
				k := int(next.Add(1) - 1)
				if k >= tasks {
					return
				}
				// The saved blocks may be mapped from a file: a fault
				// on reading them fails the task instead of the process.
				if errs[k] = mapped.Guard(errStateFault, func() error { return mc.task(k, w) }); errs[k] != nil {
					failed.Store(true)
				}
				mc.emit(k, w.enc, errs[k] != nil)
			}
		})
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return nil, err
		}
	}
	if mc.werr != nil {
		return nil, mc.werr
	}
	return workers, nil
}

// emit writes the encoded blocks of task k once those of every earlier
// task are written; a failed task stops the writing.
func (mc *mergeCtx) emit(k int, enc []byte, failed bool) {
	if mc.w == nil {
		return
	}
	mc.mu.Lock()
	defer mc.mu.Unlock()
	for mc.written != k && !mc.failed {
		mc.cond.Wait()
	}
	mc.failed = mc.failed || failed
	if !mc.failed && mc.werr == nil {
		if _, mc.werr = mc.w.Write(enc); mc.werr != nil {
			mc.failed = true
		}
	}
	mc.written++
	mc.cond.Broadcast()
}

func (mc *mergeCtx) key(r newRef) []byte { return mc.t.parts[r.p].units.key(r.u) }

// cmpUnit orders units by hash, then key bytes.
func cmpUnit(ha uint64, ka []byte, hb uint64, kb []byte) int {
	if c := cmp.Compare(ha, hb); c != 0 {
		return c
	}
	return bytes.Compare(ka, kb)
}

// task merges the saved units of task k's range with the new ones, sums
// the result and encodes it as the new state's blocks.
func (mc *mergeCtx) task(k int, w *mergeWorker) error {
	sh := mc.sh
	in, out := &w.in, &w.out
	in.reset()
	out.reset()
	refs := mc.refs[mc.refAt[k]:mc.refAt[k+1]]
	if len(refs) == 0 && mc.sv.units > 0 && mc.outBits == mc.taskBits && mc.sameArms() {
		return mc.passBlock(k, w)
	}
	if mc.sv.units > 0 {
		if err := mc.loadBlock(k, w); err != nil {
			return fmt.Errorf("%w: block %d: %w", ErrStateFormat, k, err)
		}
	}
	mc.sortRefs(w, refs)
	i := 0
	for n, r := range refs {
		if n%touchGroup == 0 {
			mc.touch(w, refs[n:min(n+touchGroup, len(refs))])
		}
		key := mc.key(r)
		j := i
		for j < in.len() && cmpUnit(in.hash[j], in.key(j), r.h, key) < 0 {
			j++
		}
		out.appendRange(in, i, j, sh)
		if i = j; i < in.len() && in.hash[i] == r.h && bytes.Equal(in.key(i), key) {
			out.appendRange(in, i, i+1, sh)
			i++
		} else {
			out.appendFresh(r.h, key, sh)
		}
		if err := mc.apply(w, out.len()-1, r); err != nil {
			return err
		}
	}
	out.appendRange(in, i, in.len(), sh)
	mc.sum(w, out)
	mc.encode(k, w, out)
	return nil
}

// sortRefs sorts a task's new units by hash, then key. The hash bits
// below the task's spread them into about one bucket per four units (a
// stable hash is uniform), in order, and each bucket is sorted on its own:
// by insertion when small, as it nearly always is, else by a comparison
// sort. A comparison sort of the whole task called a function per
// comparison (0.1 s of CPU on the 10M-unit night inside the window).
func (mc *mergeCtx) sortRefs(w *mergeWorker, refs []newRef) {
	n := len(refs)
	if n < 2 {
		return
	}
	bits := 0
	for bits < 16 && 4<<bits < n {
		bits++
	}
	bucket := func(h uint64) int {
		if bits == 0 {
			return 0
		}
		return int(h << mc.taskBits >> (64 - bits))
	}
	ends := slices.Grow(w.ends[:0], 1<<bits+1)[:1<<bits+1]
	clear(ends)
	for _, r := range refs {
		ends[bucket(r.h)+1]++
	}
	for b := range 1 << bits {
		ends[b+1] += ends[b]
	}
	sorted := slices.Grow(w.sorted[:0], n)[:n]
	for _, r := range refs {
		b := bucket(r.h)
		sorted[ends[b]] = r
		ends[b]++
	}
	less := func(a, b newRef) bool {
		return a.h < b.h || a.h == b.h && bytes.Compare(mc.key(a), mc.key(b)) < 0
	}
	lo := 0
	for _, hi := range ends[:1<<bits] {
		if hi-lo > 32 {
			slices.SortFunc(sorted[lo:hi], func(a, b newRef) int {
				if c := cmp.Compare(a.h, b.h); c != 0 {
					return c
				}
				return bytes.Compare(mc.key(a), mc.key(b))
			})
		} else {
			for i := lo + 1; i < hi; i++ {
				x, j := sorted[i], i
				for ; j > lo && less(x, sorted[j-1]); j-- {
					sorted[j] = sorted[j-1]
				}
				sorted[j] = x
			}
		}
		lo = hi
	}
	copy(refs, sorted)
	w.ends, w.sorted = ends, sorted
}

// touchGroup is the number of new units whose data a task reads ahead
// (touch) before merging them.
const touchGroup = 64

// touch reads what the merge will read of each of a group of new units
// (its key, its exposure state, its events), which lies in the
// partitions in the order the units first came, not in hash order. The
// loads of one unit do not wait for another's, so their cache misses
// overlap here instead of stalling the merge one unit at a time; the
// group then merges from the cache.
func (mc *mergeCtx) touch(w *mergeWorker, refs []newRef) {
	var sink uint64
	for _, r := range refs {
		pt, np := mc.t.parts[r.p], &mc.news[r.p]
		sink += uint64(pt.state.at(int(r.u)).t0)
		if a := np.evAt[r.u]; a < np.evAt[r.u+1] {
			sink += uint64(np.evs[a].ts)
		}
		if k := pt.units.key(r.u); len(k) > 0 {
			sink += uint64(k[0])
		}
	}
	w.sink += sink
}

// sameArms reports whether the saved arm indices are the tallier's.
func (mc *mergeCtx) sameArms() bool {
	for i, a := range mc.sv.armMap {
		if int(a) != i {
			return false
		}
	}
	return true
}

// passBlock handles saved block k when no new unit falls in it: it is
// checked, summed without its keys and written out as it is.
func (mc *mergeCtx) passBlock(k int, w *mergeWorker) error {
	b := mc.sv.blocks[k]
	if crc32.Checksum(b.data, castagnoli()) != b.crc {
		return fmt.Errorf("%w: block %d: %w", ErrStateFormat, k, errChecksum)
	}
	if err := decodeBlock(&w.in, b.data, b.n, mc.sh, nil, &w.bs); err != nil {
		return fmt.Errorf("%w: block %d: %w", ErrStateFormat, k, err)
	}
	if err := mc.checkValues(&w.in); err != nil {
		return fmt.Errorf("%w: block %d: %w", ErrStateFormat, k, err)
	}
	mc.sum(w, &w.in)
	w.enc = append(w.enc[:0], b.data...)
	mc.blocks[k] = savedBlock{n: b.n, size: b.size, crc: b.crc}
	if mc.w == nil {
		mc.blocks[k].data = b.data
	}
	return nil
}

// checkValues checks that the arms and segment values of saved units are
// among those saved.
func (mc *mergeCtx) checkValues(in *unitCols) error {
	for _, a := range in.arm {
		if int(a>>unitFlagBits) >= len(mc.sv.armMap) {
			return errBlock
		}
	}
	for i, v := range in.segs {
		if v < segNull || v != segNull && int(v) >= len(mc.sv.dicts[i%mc.sh.dims]) {
			return errBlock
		}
	}
	return nil
}

// loadBlock decodes saved block k into w.in, checking its CRC, its order
// and its values, and maps its arms to the tallier's.
func (mc *mergeCtx) loadBlock(k int, w *mergeWorker) error {
	b := mc.sv.blocks[k]
	if crc32.Checksum(b.data, castagnoli()) != b.crc {
		return errChecksum
	}
	in := &w.in
	if err := decodeBlock(in, b.data, b.n, mc.sh, mc.t.stateHash, &w.bs); err != nil {
		return err
	}
	for i := range in.len() {
		if blockOf(in.hash[i], mc.sv.bits) != k || i > 0 && cmpUnit(in.hash[i-1], in.key(i-1), in.hash[i], in.key(i)) >= 0 {
			return errOrder
		}
	}
	if err := mc.checkValues(in); err != nil {
		return err
	}
	for i, a := range in.arm {
		in.arm[i] = uint32(mc.sv.armMap[a>>unitFlagBits])<<unitFlagBits | a&(1<<unitFlagBits-1)
	}
	return nil
}

// appendFresh appends a unit with no exposure and no events.
func (c *unitCols) appendFresh(h uint64, key []byte, sh colShape) {
	c.hash = append(c.hash, h)
	c.keys = append(c.keys, key...)
	c.keyEnd = append(c.keyEnd, uint32(len(c.keys)))
	c.t0 = append(c.t0, math.MinInt64)
	c.arm = append(c.arm, 0)
	for range sh.cb {
		c.conv = append(c.conv, 0)
	}
	c.before = append(c.before, 0)
	c.in = append(c.in, 0)
	for range sh.nm {
		c.out = append(c.out, 0)
	}
	for range sh.dims {
		c.segs = append(c.segs, segNull)
	}
}

// apply applies new unit r's exposure state and metric events to unit k
// of out (its saved record, or a fresh one), under the rules of a full
// run.
func (mc *mergeCtx) apply(w *mergeWorker, k int, r newRef) error {
	out := &w.out
	pt := mc.t.parts[r.p]
	ns := pt.state.at(int(r.u))
	if ns.armAtT0 >= 0 {
		var err error
		if out.arm[k]&unitExposed != 0 {
			err = mc.exposeSaved(w, k, r, ns)
		} else {
			err = mc.exposeUnexposed(w, k, r, ns)
		}
		if err != nil {
			return err
		}
	}
	np := &mc.news[r.p]
	mc.attribute(w, k, np.evs[np.evAt[r.u]:np.evAt[r.u+1]])
	return nil
}

// exposeSaved applies the new exposures of a unit exposed before: they
// must not move its t0 or tie with it (checkBaseExposure's rules).
func (mc *mergeCtx) exposeSaved(w *mergeWorker, k int, r newRef, ns *unitState) error {
	out := &w.out
	sh := mc.sh
	t0, arm, flags := out.t0[k], out.arm[k]>>unitFlagBits, out.arm[k]&(1<<unitFlagBits-1)
	switch {
	case ns.t0 < t0:
		return &StaleStateError{Reason: "an exposure earlier than a unit's saved first exposure (a late row)"}
	case ns.t0 == t0 && (uint32(ns.armAtT0) != arm || ns.tied()):
		return &StaleStateError{Reason: "an exposure in another arm at a unit's saved first exposure (a new tie)"}
	}
	was := flagStatus(flags, mc.t.spec.MultiArm)
	if ns.multi() || uint32(ns.firstArm()) != arm {
		flags |= unitMulti
	}
	out.arm[k] = arm<<unitFlagBits | flags
	if ns.t0 == t0 {
		segs := mc.t.parts[r.p].segs[int(r.u)*sh.dims:]
		for d := range sh.dims {
			if v := mc.newSeg(r.p, d, segs[d]); mc.segLess(d, v, out.segs[k*sh.dims+d]) {
				out.segs[k*sh.dims+d] = v
			}
		}
	}
	if was == StatusAnalysed && flagStatus(flags, mc.t.spec.MultiArm) != StatusAnalysed {
		a := &w.attr
		a.BeforeExposure -= int64(out.before[k])
		a.MetricEventsInUnit -= int64(out.in[k])
		a.UnitExcluded += int64(out.before[k]) + int64(out.in[k])
		for m := range sh.nm {
			a.OutsideAttribution[m] -= int64(out.out[k*sh.nm+m])
		}
		out.clearCounts(k, sh)
	}
	return nil
}

// exposeUnexposed applies the first exposure of a unit that had at most
// metric events before: they must all be earlier than its t0.
func (mc *mergeCtx) exposeUnexposed(w *mergeWorker, k int, r newRef, ns *unitState) error {
	out := &w.out
	sh := mc.sh
	flags := uint32(unitExposed)
	if ns.tied() {
		flags |= unitTied
	}
	if ns.multi() {
		flags |= unitMulti
	}
	if before := int64(out.before[k]); before > 0 {
		a := &w.attr
		a.UnitNeverExposed -= before
		switch {
		case flagStatus(flags, mc.t.spec.MultiArm) != StatusAnalysed:
			a.UnitExcluded += before
			out.before[k] = 0
		case out.t0[k] < ns.t0:
			a.BeforeExposure += before
		default:
			return &StaleStateError{Reason: "a unit with saved metric events was exposed at or before the latest of them"}
		}
	}
	out.t0[k] = ns.t0
	out.arm[k] = uint32(ns.armAtT0)<<unitFlagBits | flags
	segs := mc.t.parts[r.p].segs[int(r.u)*sh.dims:]
	for d := range sh.dims {
		out.segs[k*sh.dims+d] = mc.newSeg(r.p, d, segs[d])
	}
	return nil
}

func (c *unitCols) clearCounts(k int, sh colShape) {
	c.before[k], c.in[k] = 0, 0
	clear(c.conv[k*sh.cb : (k+1)*sh.cb])
	clear(c.out[k*sh.nm : (k+1)*sh.nm])
}

// newSeg returns the merged index of partition p's value v of dimension d.
func (mc *mergeCtx) newSeg(p int32, d int, v int32) int32 {
	if v == segNull {
		return segNull
	}
	return mc.news[p].segMap[d][v]
}

// segLess is exposures.segLess on the merged values.
func (mc *mergeCtx) segLess(d int, a, b int32) bool { return segValueLess(mc.dicts[d], a, b) }

// attribute attributes the new metric events of unit k of out as finish
// does, and counts them as the saved state keeps them.
func (mc *mergeCtx) attribute(w *mergeWorker, k int, evs []metricEvent) {
	out, a, sh := &w.out, &w.attr, mc.sh
	flags := out.arm[k]
	for _, e := range evs {
		switch {
		case flags&unitExposed == 0:
			a.UnitNeverExposed++
			out.before[k]++
			out.t0[k] = max(out.t0[k], e.ts)
			continue
		case flagStatus(flags, mc.t.spec.MultiArm) != StatusAnalysed:
			a.UnitExcluded++
			continue
		case e.ts < out.t0[k]:
			a.BeforeExposure++
			out.before[k]++
			continue
		}
		a.MetricEventsInUnit++
		out.in[k]++
		for _, m := range mc.t.metricsOf[e.event] {
			if w := int64(mc.t.spec.Metrics[m].Window); w > 0 && e.ts-out.t0[k] >= w {
				a.OutsideAttribution[m]++
				out.out[k*sh.nm+m]++
				continue
			}
			out.conv[k*sh.cb+m/8] |= 1 << (m % 8)
		}
	}
}

// encode encodes the merged units of task k as the new state's blocks.
func (mc *mergeCtx) encode(k int, w *mergeWorker, out *unitCols) {
	d := mc.outBits - mc.taskBits
	i := 0
	w.enc = w.enc[:0]
	for b := k << d; b < (k+1)<<d; b++ {
		j := i
		for j < out.len() && blockOf(out.hash[j], mc.outBits) == b {
			j++
		}
		at := len(w.enc)
		w.enc = encodeBlock(w.enc, out, i, j, mc.sh, &w.bs)
		data := w.enc[at:]
		blk := savedBlock{n: j - i, size: len(data), crc: crc32.Checksum(data, castagnoli())}
		if mc.w == nil {
			blk.data = slices.Clone(data)
		}
		mc.blocks[b] = blk
		i = j
	}
}

// groupSums counts exposed units by everything their record holds but
// the key and t0: arm, status, multi-arm flag, converted and immature
// bits, segment values. Small shapes count in an array, others in a map.
type groupSums struct {
	dense []int64
	m     map[string]int64
	key   []byte
}

func newGroupSums(dense int) *groupSums {
	if dense > 0 {
		return &groupSums{dense: make([]int64, dense)}
	}
	return &groupSums{m: make(map[string]int64)}
}

func (g *groupSums) add(o *groupSums) {
	for i, v := range o.dense {
		g.dense[i] += v
	}
	for k, v := range o.m {
		g.m[k] += v
	}
}

// sum counts the exposed units of out.
func (mc *mergeCtx) sum(w *mergeWorker, out *unitCols) {
	sh := mc.sh
	g := w.sums
	var windows []int64
	for _, mt := range mc.t.spec.Metrics {
		windows = append(windows, int64(mt.Window))
	}
	for k, flags := range out.arm {
		if flags&unitExposed == 0 {
			continue
		}
		st := flagStatus(flags, mc.t.spec.MultiArm)
		var conv, imm uint64
		if st == StatusAnalysed {
			for m, win := range windows {
				if out.conv[k*sh.cb+m/8]&(1<<(m%8)) != 0 {
					conv |= 1 << m
				}
				if win > 0 && out.t0[k] > mc.horizon-win {
					imm |= 1 << m
				}
			}
		}
		multi := uint64(flags>>2) & 1
		if g.dense != nil {
			arm := uint64(flags >> unitFlagBits)
			g.dense[((arm*3+uint64(st))*2+multi)<<(2*sh.nm)|conv<<sh.nm|imm]++
			continue
		}
		g.key = binary.LittleEndian.AppendUint32(g.key[:0], flags>>unitFlagBits)
		g.key = append(g.key, byte(st), byte(multi))
		for m := range sh.nm {
			g.key = append(g.key, byte(conv>>m&1|imm>>m&1<<1))
		}
		for _, v := range out.segs[k*sh.dims : (k+1)*sh.dims] {
			g.key = binary.LittleEndian.AppendUint32(g.key, uint32(v))
		}
		g.m[string(g.key)]++
	}
}

// addGroups adds a merged tally's unit counts to acc.
func (t *Tallier) addGroups(acc *Accumulator, mr *mergeResult) error {
	g := mr.sums
	nm, dims := len(t.spec.Metrics), len(t.spec.Segments)
	dicts := mr.dicts
	rec := UnitRecord{Converted: make([]bool, nm), Immature: make([]bool, nm), Segments: make([]SegmentValue, dims)}
	set := func(arm uint32, st UnitStatus, multi bool) {
		rec.Arm, rec.Status, rec.MultiArm = t.arms[arm], st, multi
	}
	for i, n := range g.dense {
		if n == 0 {
			continue
		}
		x := uint64(i)
		for m := range nm {
			rec.Immature[m] = x>>m&1 != 0
			rec.Converted[m] = x>>(nm+m)&1 != 0
		}
		x >>= 2 * nm
		set(uint32(x/6), UnitStatus(x/2%3), x%2 != 0)
		if err := acc.addN(rec, n); err != nil {
			return err
		}
	}
	for key, n := range g.m {
		b := []byte(key)
		set(binary.LittleEndian.Uint32(b), UnitStatus(b[4]), b[5] != 0)
		b = b[6:]
		for m := range nm {
			rec.Converted[m], rec.Immature[m] = b[m]&1 != 0, b[m]&2 != 0
		}
		b = b[nm:]
		for d := range dims {
			rec.Segments[d] = SegmentValue{}
			if v := int32(binary.LittleEndian.Uint32(b[4*d:])); v != segNull {
				rec.Segments[d] = SegmentValue{Value: dicts[d][v], Valid: true}
			}
		}
		if err := acc.addN(rec, n); err != nil {
			return err
		}
	}
	return nil
}
