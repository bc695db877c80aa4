package ingest

import (
	"errors"
	"fmt"
	"io"
	"math"
	"unsafe"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/encoding"
)

// The bulk path reads a Parquet file's row groups in parallel, each by one
// worker, column chunk by column chunk in windows of rows, straight from
// the pages' buffers: a dictionary-encoded page stays dictionary indices,
// each index looked up in a table of strings (and of event verdicts, see
// Options.Events) built once per dictionary; plain pages are read in place.
// Each worker applies the same row rules (plan.check, plan.keep) to its
// rows and builds its own record batches; the reader hands the row groups'
// batches and bad rows on in file order, so batches, bad rows and errors
// come in the same order as on one goroutine.
//
// It takes the common columns: text columns that are BYTE_ARRAY and a ts
// column that is an INT64 count of a unit (TIMESTAMP or with an epoch
// unit), any of them taken from a partition instead. Files with other
// column types are read row by row (parquetReader.read).

// bulkWindow is the number of rows a worker decodes per column before it
// assembles them into rows.
const bulkWindow = 4096

// bulkable reports whether the bulk path can read the file's mapped columns.
func (r *parquetReader) bulkable() bool {
	for i, c := range r.cols {
		if c == nil {
			continue
		}
		if i == colTS {
			if c.ts.kind != kindTSEpoch64 {
				return false
			}
		} else if c.kind != kindBytes {
			return false
		}
	}
	return true
}

// rgResult is what a worker made of one row group.
type rgResult struct {
	recs []arrow.RecordBatch // the kept rows, in order
	bad  []badRow            // the bad rows, in order; values are copies
	// rows is the number of rows read: all of the row group's, or those
	// up to the bad row that stops the reader (without a budget) or up to
	// an error.
	rows     int64
	filtered filterCount
	err      error // after the bad rows
	rg       int   // the row group
}

func (res *rgResult) release() {
	for _, rec := range res.recs {
		rec.Release()
	}
	res.recs = nil
}

// pipeline runs the workers of one file.
type pipeline struct {
	o       *ordered[rgResult] // a task per row group
	cur     rgResult           // the row group being handed on
	base    int64              // accounting.rowsRead when the file's first batch was asked for
	baseSet bool
}

// startPipeline starts the dispatcher and the workers.
func (r *parquetReader) startPipeline(workers int, budget bool) {
	n := len(r.rowGroups)
	workers = max(1, min(workers, n))
	r.pl = &pipeline{o: startOrdered(workers,
		func(emit func(int) bool) {
			for rg := 0; rg < n && emit(rg); rg++ {
			}
		},
		func(stop <-chan struct{}) (func(int) rgResult, func()) {
			wk := r.newWorker(budget, stop)
			return wk.run, wk.close
		})}
}

// stopPipeline stops the workers and releases what they made.
func (r *parquetReader) stopPipeline() {
	pl := r.pl
	if pl == nil {
		return
	}
	r.pl = nil
	pl.o.close(func(res rgResult) { res.release() })
	pl.cur.release()
}

// batched reports whether the file is read by the bulk path.
func (r *parquetReader) batched() bool { return r.bulk }

// nextBatch returns the next record batch of the file in order, or io.EOF
// after the last. It counts rows and bad rows in a as the row-by-row
// reader does: a bad row that stops the reader stops it at the same row.
func (r *parquetReader) nextBatch(workers int, a *accounting) (rec arrow.RecordBatch, err error) {
	if r.pl == nil {
		if r.plDone {
			return nil, io.EOF
		}
		r.startPipeline(workers, a.budget)
	}
	pl := r.pl
	if !pl.baseSet {
		// A file read ahead (Reader.readAhead) started before the
		// rows of the files before it were counted.
		pl.base, pl.baseSet = a.rowsRead, true
	}
	for len(pl.cur.recs) == 0 {
		res, ok := pl.o.next()
		if !ok {
			r.plDone = true
			r.stopPipeline()
			return nil, io.EOF
		}
		pl.cur = res
		if !a.budget {
			// Without a budget the worker stopped at its first bad row:
			// its filtered rows are those before it.
			a.filtered.merge(res.filtered)
		}
		for _, b := range res.bad {
			a.rowsRead = pl.base + b.row
			if err := a.bad(b); err != nil {
				return nil, err
			}
		}
		a.rowsRead = pl.base + r.rgStart[res.rg] + res.rows
		if a.budget {
			a.filtered.merge(res.filtered)
		}
		if res.err != nil {
			return nil, res.err
		}
	}
	rec = pl.cur.recs[0]
	pl.cur.recs[0] = nil
	pl.cur.recs = pl.cur.recs[1:]
	return rec, nil
}

// rgWorker decodes row groups for one pipeline.
type rgWorker struct {
	r      *parquetReader
	pf     *parquet.File
	openEr error
	budget bool
	stop   <-chan struct{}
	cols   []*bulkColumn // per logical column; nil for a partition column
	bld    *batchBuilder
	batch  int // rows in the batch being built
	row    row
	// need is the window's rowsNeeded (nil: every row), in needBuf;
	// failed is the column fillWindow stopped at.
	need    []bool
	needBuf []bool
	sel     []int32 // the window's needed rows (selectNeeded)
	failed  int
}

func (r *parquetReader) newWorker(budget bool, stop <-chan struct{}) *rgWorker {
	w := &rgWorker{r: r, budget: budget, stop: stop}
	// Each worker has its own view of the file: parquet-go's File is
	// only read here, but its row groups' page readers are not shared.
	w.pf, w.openEr = openParquet(r.src.r, r.src.size)
	w.cols = make([]*bulkColumn, len(r.cols))
	for i, c := range r.cols {
		if c == nil {
			continue
		}
		bc := &bulkColumn{pqColumn: c}
		if i == colTS {
			bc.times = make([]tsCell, bulkWindow)
		} else {
			bc.cells = make([]cell, bulkWindow)
		}
		if i == colEvent && r.p.events != nil {
			bc.events, bc.exposure = r.p.events, r.p.exposure
			bc.verdicts = make([]uint8, bulkWindow)
		}
		bc.empties = i == colUser && r.p.events != nil
		if r.p.dict != nil && r.p.dict[i] {
			bc.intern = newInterner()
		}
		w.cols[i] = bc
	}
	w.row.cells = make([]cell, len(r.p.physical))
	w.bld = newBatchBuilder(r.mem, r.p)
	return w
}

func (w *rgWorker) close() {
	for _, c := range w.cols {
		if c != nil {
			c.closePages()
		}
	}
	w.bld.release()
}

// run decodes row group rg.
func (w *rgWorker) run(rg int) (res rgResult) {
	r := w.r
	res.rg = rg
	defer func() {
		// Last-resort guard, as in parquetReader.read.
		if v := recover(); v != nil {
			res.err = fmt.Errorf("%s: row group %d: corrupt parquet data: %w: %v", r.file, rg, errPanicked, v)
		}
		for _, c := range w.cols {
			if c != nil {
				c.closePages()
			}
		}
		if res.err != nil {
			w.bld.discard()
		}
	}()
	rgRows, err := w.openChunks(rg)
	if err != nil {
		res.err = err
		return res
	}
	w.batch = 0
	for done := int64(0); done < rgRows; {
		select {
		case <-w.stop:
			res.err = errStopped
			return res
		default:
		}
		n := int(min(int64(bulkWindow), rgRows-done))
		if err := w.fillWindow(n); err != nil {
			res.rows = done
			res.err = chunkError(r.file, rg, w.cols[w.failed].name, rgRows, err)
			return res
		}
		if !w.window(&res, rg, done, n) {
			return w.flush(res)
		}
		done += int64(n)
		for _, c := range w.cols {
			if c != nil {
				c.retire()
			}
		}
	}
	res.rows = rgRows
	for _, c := range w.cols {
		if c == nil {
			continue
		}
		// A column with values beyond the row group's rows is corrupt.
		if err := c.end(rgRows); err != nil {
			res.err = fmt.Errorf("%s: row group %d: column %q: %w", r.file, rg, c.name, err)
			return res
		}
	}
	return w.flush(res)
}

// openChunks checks row group rg and the metadata of its mapped column
// chunks and opens their pages. It returns the row group's rows.
func (w *rgWorker) openChunks(rg int) (int64, error) {
	r := w.r
	if w.openEr != nil {
		return 0, fmt.Errorf("%s: %w", r.file, w.openEr)
	}
	g := w.pf.RowGroups()[rg]
	rgRows := g.NumRows()
	if rgRows < 0 {
		return 0, fmt.Errorf("%s: row group %d: %w: %d rows", r.file, rg, ErrCorrupt, rgRows)
	}
	chunks := g.ColumnChunks()
	for _, c := range w.cols {
		if c == nil {
			continue
		}
		if c.index < 0 || c.index >= len(chunks) {
			return 0, fmt.Errorf("%s: row group %d: column %q: %w: no column chunk", r.file, rg, c.name, ErrCorrupt)
		}
		if err := r.checkChunk(c.pqColumn, rg, rgRows); err != nil {
			return 0, fmt.Errorf("%s: row group %d: column %q: %w", r.file, rg, c.name, err)
		}
		c.open(chunks[c.index].Pages())
	}
	return rgRows, nil
}

// fillWindow decodes the next n rows of every column. Without an event
// filter, or with user, ts or event from a partition, it decodes every
// row of every column, in column order. With a filter it decodes ts and
// event first and decides from them which rows are needed (rowsNeeded);
// a row of an unwanted event that is no exposure and whose ts and event
// are valid is needed only when its user is null or empty (it is then a
// bad row), so the user column is decoded for the needed rows and only
// checked for the others (fillUser), and the columns beyond user, ts and
// event are decoded for the needed rows, the values of the others skipped,
// their dictionary indices still checked. On an error w.failed is the
// column at fault: the first in column order that fails in the window.
func (w *rgWorker) fillWindow(n int) error {
	w.need = nil
	uc, tc, ec := w.cols[colUser], w.cols[colTS], w.cols[colEvent]
	if uc == nil || tc == nil || ec == nil || ec.verdicts == nil {
		for i, c := range w.cols {
			if c == nil {
				continue
			}
			if err := c.fill(n, nil); err != nil {
				w.failed = i
				return err
			}
		}
		return nil
	}
	if err := w.fillBeforeUser(colTS, n); err != nil {
		return err
	}
	if err := w.fillBeforeUser(colEvent, n); err != nil {
		return err
	}
	need := w.rowsNeeded(n)
	if err := uc.fillUser(n, need); err != nil {
		w.failed = colUser
		return err
	}
	for i := colEvent + 1; i < len(w.cols); i++ {
		c := w.cols[i]
		if c == nil {
			continue
		}
		if err := c.fill(n, need); err != nil {
			w.failed = i
			return err
		}
	}
	w.need = need
	return nil
}

// fillBeforeUser decodes the next n rows of column i (ts or event) ahead
// of the user column, which comes before it in column order. When column
// i fails in the window, or its decoding panics, the user column's rows of
// the window are decoded, and its own error, if any, is the one returned,
// as when the user column is decoded first; otherwise column i's error (or
// panic) stands.
func (w *rgWorker) fillBeforeUser(i, n int) (err error) {
	defer func() {
		v := recover()
		if v == nil && err == nil {
			return
		}
		if uerr := w.cols[colUser].fill(n, nil); uerr != nil {
			w.failed, err = colUser, uerr
			return
		}
		if v != nil {
			panic(v)
		}
		w.failed = i
	}()
	return w.cols[i].fill(n, nil)
}

// rowsNeeded returns, per row of the window, whether the row needs more
// than its ts and event by what they hold: true for a row of a wanted
// event, an exposure, or a row whose ts or event is invalid (the event's
// part is its verdict, evNeed, decided once per dictionary entry).
// fillUser then marks the rows whose user is null or empty. With user, ts
// and event from the file and an event filter only (see fillWindow).
func (w *rgWorker) rowsNeeded(n int) []bool {
	tc, ec := w.cols[colTS], w.cols[colEvent]
	if w.needBuf == nil {
		w.needBuf = make([]bool, bulkWindow)
	}
	need := w.needBuf[:n]
	times, verdicts := tc.times[:n], ec.verdicts[:n]
	// One test per row, without a branch: tsOK is 0 (checked below),
	// so a row is needed when its verdict's evNeed bit or its ts state is
	// set.
	for k := range need {
		need[k] = verdicts[k]&evNeed|times[k].state != 0
	}
	return need
}

// This does not compile unless tsOK is 0, which rowsNeeded
// relies on.
var _ = [1]struct{}{}[tsOK]

// selectNeeded lists the needed rows of the window (w.need) in w.sel and
// returns the count of the others, the valid rows of unwanted events,
// without a branch per row: which rows are needed follows no pattern.
func (w *rgWorker) selectNeeded(n int) ([]int32, filterCount) {
	if w.sel == nil {
		w.sel = make([]int32, bulkWindow)
	}
	need, times, sel := w.need[:n], w.cols[colTS].times[:n], w.sel[:n]
	got, maxTS := 0, int64(math.MinInt64)
	for k, nd := range need {
		sel[got] = int32(k)
		b := b2i(nd)
		got += b
		// A needed row's ts is masked to the least int64, which leaves
		// the largest ts as it is.
		mask := int64(-b)
		maxTS = max(maxTS, times[k].ns&^mask|math.MinInt64&mask)
	}
	skipped := n - got
	var f filterCount
	if skipped > 0 {
		f = filterCount{n: int64(skipped), maxTS: maxTS}
	}
	return sel[:got], f
}

// window applies the row rules to the n decoded rows of the window that
// starts done rows into row group rg, as parquetReader.read does, and
// puts the kept ones into batches. It returns false when a bad row stops
// the reader (there is no budget); res.rows then counts the rows up to it.
func (w *rgWorker) window(res *rgResult, rg int, done int64, n int) bool {
	if w.need == nil {
		for k := 0; k < n; k++ {
			if !w.apply(res, rg, done, k) {
				return false
			}
		}
		return true
	}
	// The rows not needed (see rowsNeeded) are valid rows of unwanted
	// events: only counted.
	sel, skipped := w.selectNeeded(n)
	for _, k := range sel {
		if !w.apply(res, rg, done, int(k)) {
			// Only the rows before the one that stopped the reader count.
			for j := range int(k) {
				if !w.need[j] {
					res.filtered.add(w.cols[colTS].times[j].ns)
				}
			}
			return false
		}
	}
	res.filtered.merge(skipped)
	return true
}

// apply applies the row rules to row k of the window and appends it to
// the batch when it is kept; it returns false when the row is bad and
// stops the reader.
func (w *rgWorker) apply(res *rgResult, rg int, done int64, k int) bool {
	r := w.r
	row := &w.row
	r.part.fill(row)
	for i, c := range w.cols {
		if c == nil {
			continue
		}
		if i == colTS {
			row.ts, row.cells[i], row.tsErr = c.times[k].get(&c.ts)
			continue
		}
		row.cells[i] = c.cells[k]
	}
	if col, reason := r.p.check(row); reason != nil {
		b := r.p.badRow(r.file, r.rgStart[rg]+done+int64(k)+1, rg, row, col, reason)
		b.value = string([]byte(b.value)) // the page buffers are reused
		res.bad = append(res.bad, b)
		if !w.budget {
			res.rows = done + int64(k) + 1
			return false
		}
		return true
	}
	// With a filter, the event column's verdict is plan.keep's.
	if ec := w.cols[colEvent]; ec != nil && ec.verdicts != nil && w.need != nil {
		if ec.verdicts[k]&evKeep == 0 {
			res.filtered.add(row.ts)
			return true
		}
	} else if !r.p.keep(row) {
		res.filtered.add(row.ts)
		return true
	}
	w.bld.append(row)
	w.batch++
	if w.batch == r.batchSize || w.bld.full() {
		res.recs = append(res.recs, w.bld.newRecord())
		w.batch = 0
	}
	return true
}

// flush ends the row group's last batch.
func (w *rgWorker) flush(res rgResult) rgResult {
	if w.batch > 0 {
		res.recs = append(res.recs, w.bld.newRecord())
		w.batch = 0
	}
	return res
}

// errStopped ends a worker's row group when the reader is closed.
var errStopped = errors.New("reader closed")

// chunkError wraps an error reading the pages of a column chunk, on both
// paths: errColumnShort, or parquet-go's error, kept for errors.Is
// (ErrCorrupted, io.ErrUnexpectedEOF, ...), for a page of a file whose
// metadata checked out that cannot be decoded.
func chunkError(file string, rg int, col string, rgRows int64, err error) error {
	if err == errColumnShort {
		return fmt.Errorf("%s: row group %d: column %q: %w: %w (%d rows)", file, rg, col, ErrCorrupt, err, rgRows)
	}
	return fmt.Errorf("%s: row group %d: column %q: %w: %w", file, rg, col, ErrCorrupt, err)
}

// bulkColumn reads one column chunk in windows of rows, page by page.
type bulkColumn struct {
	*pqColumn
	cells []cell   // text: the window's values; they point into pages
	times []tsCell // ts: the window's values
	// events and exposure are the plan's, on the event column with a
	// filter; verdicts are then the window's rows' (evKeep, evNeed).
	events   *nameSet
	exposure string
	verdicts []uint8

	pages   parquet.Pages
	page    parquet.Page
	retired []parquet.Page // pages whose values the window may still use
	levels  []byte         // definition levels of the page; nil: all defined
	nrows   int            // rows (values and nulls) in the page
	pos     int            // next row of the page
	vpos    int            // next non-null value of the page
	nvals   int

	idx         []int32 // dictionary indices of the page, or nil
	data        []byte  // plain byte arrays of the page
	offs        []uint32
	i64         []int64 // plain int64 values of the page
	lastDict    parquet.Dictionary
	dictStr     []string
	dictVerdict []uint8 // per dictionary value, with verdicts
	// dictEmpty marks the dictionary's empty strings, for a column that
	// is only checked (fillUser); nil for the other columns.
	dictEmpty []bool
	anyEmpty  bool // dictEmpty marks one
	empties   bool // the column is the user column, see fillUser
	dictI64   []int64
	// intern gives the values of a dictionary-encoded column of the
	// batches (plan.dict) their codes, and codes holds the code plus one
	// of each value of the dictionary (cell.code); both nil on the other
	// columns.
	intern *interner
	codes  []int32
}

func (c *bulkColumn) open(pages parquet.Pages) {
	c.closePages()
	c.pages = pages
}

// fill decodes the next n rows into c.cells or c.times (and c.verdicts). A
// text column that only the rows marked in need use (nil: every row)
// leaves the cells of the other rows as they were; their dictionary
// indices are checked all the same, so that a damaged page fails where it
// would without need.
func (c *bulkColumn) fill(n int, need []bool) error {
	for k := 0; k < n; {
		if c.pos >= c.nrows {
			if err := c.nextPage(); err != nil {
				return err
			}
			continue
		}
		m := min(n-k, c.nrows-c.pos)
		if c.times != nil {
			if err := c.fillTS(c.times[k : k+m]); err != nil {
				return err
			}
		} else if need != nil {
			if err := c.fillTextNeeded(k, m, need[k:k+m]); err != nil {
				return err
			}
		} else if err := c.fillText(k, m); err != nil {
			return err
		}
		k += m
	}
	return nil
}

// fillTextNeeded is fillText for the rows marked in need; it skips the
// values of the others (skip). A dictionary-encoded page without verdicts
// takes one loop over its rows (fillDictNeeded); any other takes runs of
// needed and skipped rows.
func (c *bulkColumn) fillTextNeeded(k, m int, need []bool) error {
	if c.idx != nil && c.verdicts == nil {
		return c.fillDictNeeded(c.cells[k:k+m], need[:m])
	}
	for j := 0; j < m; {
		e := j
		for e < m && need[e] {
			e++
		}
		if e > j {
			if err := c.fillText(k+j, e-j); err != nil {
				return err
			}
			j = e
			continue
		}
		for e < m && !need[e] {
			e++
		}
		if err := c.skip(e - j); err != nil {
			return err
		}
		j = e
	}
	return nil
}

// fillDictNeeded is fillTextNeeded on a dictionary-encoded page: each
// row's dictionary index is checked, and its cell filled when it is
// needed.
func (c *bulkColumn) fillDictNeeded(cells []cell, need []bool) error {
	dict, codes := c.dictStr, c.codes
	need = need[:len(cells)]
	if c.levels == nil {
		idx := c.idx[c.vpos : c.vpos+len(cells)]
		for j, x := range idx {
			if uint(x) >= uint(len(dict)) {
				return dictIndexError(x, len(dict))
			}
			if need[j] {
				cells[j] = cell{s: dict[x], code: codeOf(codes, x)}
			}
		}
		c.pos += len(cells)
		c.vpos += len(cells)
		return nil
	}
	levels, idx, v := c.levels[c.pos:c.pos+len(cells)], c.idx, c.vpos
	for j, l := range levels {
		if l != c.maxDef {
			if need[j] {
				cells[j] = cell{null: true}
			}
			continue
		}
		x := idx[v]
		v++
		if uint(x) >= uint(len(dict)) {
			return dictIndexError(x, len(dict))
		}
		if need[j] {
			cells[j] = cell{s: dict[x], code: codeOf(codes, x)}
		}
	}
	c.pos += len(cells)
	c.vpos = v
	return nil
}

// skip moves past the page's next n rows without decoding their values;
// their dictionary indices are checked as fillText checks them.
func (c *bulkColumn) skip(n int) error {
	for range n {
		if v := c.value(); v >= 0 && c.idx != nil {
			if _, err := dictIndex(c.idx[v], len(c.dictStr)); err != nil {
				return err
			}
		}
	}
	return nil
}

// fillUser decodes the next n rows of the user column for the rows marked
// in need and checks the others: a null or empty user makes its row
// needed (need[k] is set) and its cell is filled, so that the row is
// reported as a bad row; the cells of the other rows are left as they
// were. Dictionary indices are checked on every row, as fillText checks
// them.
func (c *bulkColumn) fillUser(n int, need []bool) error {
	for k := 0; k < n; {
		if c.pos >= c.nrows {
			if err := c.nextPage(); err != nil {
				return err
			}
			continue
		}
		m := min(n-k, c.nrows-c.pos)
		if err := c.fillUserPage(c.cells[k:k+m], need[k:k+m]); err != nil {
			return err
		}
		k += m
	}
	return nil
}

// fillUserPage is fillUser for rows of the current page.
func (c *bulkColumn) fillUserPage(cells []cell, need []bool) error {
	need = need[:len(cells)]
	if c.idx != nil {
		dict, empty := c.dictStr, c.dictEmpty[:len(c.dictStr)]
		if c.levels == nil {
			if !c.anyEmpty {
				// No row turns needed: the common case, read as the
				// other columns are, without a look-up in dictEmpty per
				// row.
				return c.fillDictNeeded(cells, need)
			}
			// No nulls: the rows are the page's next values.
			idx := c.idx[c.vpos : c.vpos+len(cells)]
			c.pos += len(cells)
			c.vpos += len(cells)
			for j, x := range idx {
				if uint(x) >= uint(len(dict)) {
					return dictIndexError(x, len(dict))
				}
				if need[j] || empty[x] {
					cells[j], need[j] = cell{s: dict[x]}, true
				}
			}
			return nil
		}
		for j := range cells {
			v := c.value()
			if v < 0 {
				cells[j], need[j] = cell{null: true}, true
				continue
			}
			x, err := dictIndex(c.idx[v], len(dict))
			if err != nil {
				return err
			}
			if need[j] || empty[x] {
				cells[j], need[j] = cell{s: dict[x]}, true
			}
		}
		return nil
	}
	for j := range cells {
		v := c.value()
		if v < 0 {
			cells[j], need[j] = cell{null: true}, true
			continue
		}
		// Offsets out of order or beyond the data (parquet-go computes
		// them; never seen) take fillText's way too, to fail as it does;
		// the row, needed without need, is then filtered in window.
		lo, hi := c.offs[v], c.offs[v+1]
		if need[j] || lo >= hi || int(hi) > len(c.data) {
			b := c.data[lo:hi]
			cells[j], need[j] = cell{s: unsafe.String(unsafe.SliceData(b), len(b))}, true
		}
	}
	return nil
}

// value moves past the page's next row and returns the position of its
// value among the page's values (an index into c.idx when the page is
// dictionary-encoded), or -1 for a null.
func (c *bulkColumn) value() int {
	i := c.pos
	c.pos++
	if c.levels != nil && c.levels[i] != c.maxDef {
		return -1
	}
	c.vpos++
	return c.vpos - 1
}

// dictIndex checks a dictionary index against a dictionary of n values.
func dictIndex(x int32, n int) (int, error) {
	if uint(x) >= uint(n) { // also x < 0; small enough to be inlined in the loops
		return 0, dictIndexError(x, n)
	}
	return int(x), nil
}

// dictIndexError is dictIndex's error, out of line so that dictIndex is
// inlined in the decode loops.
//
//go:noinline
func dictIndexError(x int32, n int) error {
	return fmt.Errorf("dictionary index %d of a dictionary of %d values", x, n)
}

func (c *bulkColumn) fillText(k, m int) error {
	cells := c.cells[k : k+m]
	var verdicts []uint8
	if c.verdicts != nil {
		verdicts = c.verdicts[k : k+m]
	}
	for j := range cells {
		v := c.value()
		var vd uint8
		switch {
		case v < 0:
			cells[j], vd = cell{null: true}, evNeed
		case c.idx != nil:
			x, err := dictIndex(c.idx[v], len(c.dictStr))
			if err != nil {
				return err
			}
			cells[j] = cell{s: c.dictStr[x], code: codeOf(c.codes, x)}
			if verdicts != nil {
				vd = c.dictVerdict[x]
			}
		default:
			b := c.data[c.offs[v]:c.offs[v+1]]
			s := unsafe.String(unsafe.SliceData(b), len(b))
			cells[j] = cell{s: s}
			if verdicts != nil {
				vd = c.verdict(s)
			}
		}
		if verdicts != nil {
			verdicts[j] = vd
		}
	}
	return nil
}

// The verdicts of an event column with a filter, per row (an event cell's
// verdict does not depend on the rest of its row).
const (
	evKeep = 1 << iota // the event is wanted: plan.keep
	evNeed             // the row is wanted, an exposure, or its event null or empty: see rowsNeeded
)

// verdict returns the verdict of the event name s (not null).
func (c *bulkColumn) verdict(s string) uint8 {
	switch {
	case c.events.has(s):
		return evKeep | evNeed
	case s == "" || s == c.exposure:
		return evNeed
	}
	return 0
}

func (c *bulkColumn) fillTS(dst []tsCell) error {
	for j := range dst {
		v := c.value()
		if v < 0 {
			dst[j] = tsCell{state: tsNull}
			continue
		}
		vals := c.i64
		if c.idx != nil {
			x, err := dictIndex(c.idx[v], len(c.dictI64))
			if err != nil {
				return err
			}
			vals, v = c.dictI64, x
		}
		dst[j] = c.ts.epoch(vals[v])
	}
	return nil
}

// nextPage reads the next page of the chunk and checks that its values
// match its definition levels.
func (c *bulkColumn) nextPage() error {
	if c.page != nil {
		c.retired = append(c.retired, c.page)
		c.page = nil
	}
	if c.pages == nil {
		return errColumnShort
	}
	p, err := c.pages.ReadPage()
	if err == io.EOF {
		return errColumnShort
	}
	if err != nil {
		return err
	}
	c.page = p
	c.levels = p.DefinitionLevels()
	c.idx, c.data, c.offs, c.i64 = nil, nil, nil, nil
	data := p.Data()
	if d := p.Dictionary(); d != nil {
		if data.Kind() != encoding.Int32 {
			return fmt.Errorf("dictionary-encoded page of %v values", data.Kind())
		}
		c.idx = data.Int32()
		c.nvals = len(c.idx)
		if d != c.lastDict {
			if err := c.readDictionary(d); err != nil {
				return err
			}
		}
	} else {
		switch {
		case c.times == nil && data.Kind() == encoding.ByteArray:
			c.data, c.offs = data.ByteArray()
			c.nvals = max(len(c.offs)-1, 0)
		case c.times != nil && data.Kind() == encoding.Int64:
			c.i64 = data.Int64()
			c.nvals = len(c.i64)
		default:
			return fmt.Errorf("page of %v values", data.Kind())
		}
	}
	c.nrows, c.pos, c.vpos = c.nvals, 0, 0
	if c.levels != nil {
		c.nrows = len(c.levels)
		defined := 0
		for _, l := range c.levels {
			if l == c.maxDef {
				defined++
			}
		}
		if defined != c.nvals {
			return fmt.Errorf("page with %d defined values among %d rows holds %d values", defined, c.nrows, c.nvals)
		}
	}
	return nil
}

// readDictionary builds the lookup tables of dictionary d.
func (c *bulkColumn) readDictionary(d parquet.Dictionary) error {
	data := d.Page().Data()
	c.lastDict = d
	if c.times != nil {
		if data.Kind() != encoding.Int64 {
			return fmt.Errorf("dictionary of %v values", data.Kind())
		}
		c.dictI64 = data.Int64()
		return nil
	}
	if data.Kind() != encoding.ByteArray {
		return fmt.Errorf("dictionary of %v values", data.Kind())
	}
	b, offs := data.ByteArray()
	n := max(len(offs)-1, 0)
	c.dictStr = c.dictStr[:0]
	for i := 0; i < n; i++ {
		v := b[offs[i]:offs[i+1]]
		c.dictStr = append(c.dictStr, unsafe.String(unsafe.SliceData(v), len(v)))
	}
	if c.intern != nil {
		c.codes = c.codes[:0]
		for _, s := range c.dictStr {
			c.codes = append(c.codes, c.intern.code(s))
		}
	}
	if c.verdicts != nil {
		c.dictVerdict = c.dictVerdict[:0]
		for _, s := range c.dictStr {
			c.dictVerdict = append(c.dictVerdict, c.verdict(s))
		}
	}
	if c.empties {
		c.dictEmpty, c.anyEmpty = c.dictEmpty[:0], false
		for _, s := range c.dictStr {
			c.dictEmpty = append(c.dictEmpty, s == "")
			c.anyEmpty = c.anyEmpty || s == ""
		}
	}
	return nil
}

// retire releases the pages no longer needed once the window's rows are
// used.
func (c *bulkColumn) retire() {
	for i, p := range c.retired {
		parquet.Release(p)
		c.retired[i] = nil
	}
	c.retired = c.retired[:0]
}

// end checks that the chunk has no values beyond the rows read.
func (c *bulkColumn) end(rgRows int64) error {
	more := fmt.Errorf("%w: more values than the %d rows of the row group", ErrCorrupt, rgRows)
	if c.pos < c.nrows {
		return more
	}
	for {
		err := c.nextPage()
		if err == errColumnShort {
			return nil
		}
		if err != nil {
			return fmt.Errorf("%w: %w", ErrCorrupt, err)
		}
		if c.nrows > 0 {
			return more
		}
	}
}

func (c *bulkColumn) closePages() {
	c.retire()
	if c.page != nil {
		parquet.Release(c.page)
		c.page = nil
	}
	if c.pages != nil {
		c.pages.Close()
		c.pages = nil
	}
	c.levels, c.idx, c.data, c.offs, c.i64 = nil, nil, nil, nil, nil
	c.nrows, c.pos, c.vpos, c.nvals = 0, 0, 0, 0
	c.lastDict, c.dictStr, c.dictVerdict, c.dictEmpty, c.dictI64, c.anyEmpty = nil, c.dictStr[:0], c.dictVerdict[:0], c.dictEmpty[:0], nil, false
}

// b2i is 1 for true and 0 for false, without a branch.
func b2i(b bool) int {
	var i int
	if b {
		i = 1
	}
	return i
}

// codeOf returns the code of dictionary value x (cell.code), 0 when the
// column's values have no codes (codes nil).
func codeOf[I int | int32](codes []int32, x I) int32 {
	if codes == nil {
		return 0
	}
	return codes[x]
}
