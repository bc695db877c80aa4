package ingest

import (
	"fmt"
	"strconv"
	"sync/atomic"
	"unsafe"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
	"github.com/apache/arrow-go/v18/arrow/memory"
)

// ArrowReader reads the record batches of a caller's array.RecordReader (an
// Arrow IPC stream, a query engine's result) and returns the same logical
// event table as Reader does for a file of the same rows: the same schema,
// row rules, bad-row reasons, error budget, event filter and Stats (Files is
// 1 once the stream is read). It is itself an array.RecordReader.
//
// The mapped columns are found by name in the input's schema (a name the
// schema holds twice is an error). They may be
//
//	user, event, experiment, arm, segments
//	    utf8, large_utf8, utf8_view, a dictionary of any integer index
//	    over one of those, or any integer type (written in decimal)
//	ts  timestamp of any unit, with or without a time zone (the instant
//	    counts; a timestamp without one is taken as UTC, as Parquet
//	    timestamps not adjusted to UTC are), date32 (midnight UTC),
//	    date64 (its milliseconds since the epoch), an integer other than
//	    uint64 counting Mapping.EpochUnit, or text as above (parsed as
//	    CSV cells are)
//
// A dictionary column is decided once per dictionary entry (its text, its
// event verdict for Options.Events, its parsed timestamp), not once per row.
// A null is read as the file readers read it: a null user is a bad row
// (ErrNullUser), a null experiment, arm or segment is null.
//
// Bad rows are named by the stream's name and the row's position in the
// whole stream counting from 1 (as Parquet rows are counted in their file;
// an Arrow stream has no header line), with RowGroup -1:
//
//	arrow stream:5: column "user_id": null or empty user id
//
// Output batches hold up to Options.BatchSize rows and may take rows of
// several input batches. Options.Workers and Delimiter do not apply; the
// stream is read on the caller's goroutine. The ArrowReader retains the input reader and
// releases it on Close; input batches are released once read. An
// ArrowReader is not safe for concurrent use (except Progress).
type ArrowReader struct {
	in        array.RecordReader
	name      string
	plan      *plan
	mem       memory.Allocator
	batchSize int
	cols      []*arrowColumn // per logical column

	bld     *batchBuilder
	rec     arrow.RecordBatch // the current output batch
	cur     arrow.RecordBatch // the input batch being read, retained
	batches int               // input batches taken
	inPos   int               // next row of cur to decode
	win     int               // rows of cur decoded into the window
	k       int               // next row of the window to check
	base    int64             // rows of the stream before the window
	row     row
	acct    accounting
	err     error
	eof     bool // the input reader has no more batches
	ended   bool // the end-of-input budget check is done
	closed  bool

	refs     atomic.Int64
	progress atomic.Int64
}

var _ array.RecordReader = (*ArrowReader)(nil)

// arrowWindow is the most rows decoded per column before they are checked
// row by row.
const arrowWindow = 4096

// NewArrowReader returns a reader of rr's batches; name labels the stream in
// errors ("arrow stream"). It checks the options as NewReader does, and the
// input schema: a mapped column that the schema lacks or that has a type
// listed nowhere in ArrowReader's documentation is a *ColumnError naming
// the stream and the column.
func NewArrowReader(rr array.RecordReader, name string, opts Options) (*ArrowReader, error) {
	// A Reader without sources checks the options and holds the plan and
	// the error budget exactly as for files.
	base, err := NewReader(nil, opts)
	if err != nil {
		return nil, err
	}
	if rr == nil || rr.Schema() == nil {
		return nil, fmt.Errorf("%s: no record reader or no schema", name)
	}
	r := &ArrowReader{in: rr, name: name, plan: base.plan, mem: base.mem, batchSize: base.batchSize, acct: base.acct}
	schema := rr.Schema()
	for i, phys := range r.plan.physical {
		c, err := bindArrowColumn(name, schema, phys, i, r.plan)
		if err != nil {
			return nil, err
		}
		r.cols = append(r.cols, c)
	}
	r.row.cells = make([]cell, len(r.plan.physical))
	rr.Retain()
	r.refs.Store(1)
	return r, nil
}

// Schema returns the schema of the record batches: the logical event table.
func (r *ArrowReader) Schema() *arrow.Schema { return r.plan.schema }

// Next advances to the next record batch and reports whether there is one.
// It returns false at the end of the input and on the first error.
func (r *ArrowReader) Next() (ok bool) {
	releaseBatch(&r.rec)
	if r.err != nil || r.closed {
		return false
	}
	if r.bld == nil {
		r.bld = newBatchBuilder(r.mem, r.plan)
		r.acct.files = 1
	}
	defer func() {
		// Last-resort guard: an input array whose buffers contradict its
		// length or offsets makes arrow-go panic. Stop with an error.
		if v := recover(); v != nil {
			r.err = fmt.Errorf("%s: batch %d: malformed arrow data: %v", r.name, r.batches, v)
			r.bld.discard()
			ok = false
		}
	}()
	n, err := r.fill()
	r.progress.Store(r.acct.rowsRead)
	switch {
	case err != nil:
		r.bld.discard()
		r.err = err
		return false
	case n > 0:
		r.rec = r.bld.newRecord()
		r.acct.rows += int64(n)
		return true
	case !r.ended:
		r.ended = true
		r.err = r.acct.endCheck()
	}
	return false
}

// fill appends up to a batch of valid rows to the builder and returns how
// many; 0 at the end of the input.
func (r *ArrowReader) fill() (int, error) {
	n := 0
	for n < r.batchSize && !r.bld.full() {
		if r.k == r.win {
			more, err := r.window()
			if err != nil || !more {
				return n, err
			}
			continue
		}
		m, err := r.take(r.batchSize - n)
		n += m
		if err != nil {
			return n, err
		}
	}
	return n, nil
}

// window decodes the next rows of the input, taking the next input batch
// when the current one is used up. It returns false at the end of the
// stream.
func (r *ArrowReader) window() (bool, error) {
	r.base += int64(r.win)
	r.win, r.k = 0, 0
	for r.cur == nil || int64(r.inPos) == r.cur.NumRows() {
		releaseBatch(&r.cur)
		if r.eof {
			return false, nil
		}
		if !r.in.Next() {
			r.eof = true
			if err := r.in.Err(); err != nil {
				return false, fmt.Errorf("%s: %w", r.name, err)
			}
			return false, nil
		}
		rec := r.in.RecordBatch()
		r.batches++
		if err := r.checkBatch(rec); err != nil {
			r.eof = true
			return false, err
		}
		rec.Retain()
		r.cur, r.inPos = rec, 0
	}
	n := int(min(int64(arrowWindow), r.cur.NumRows()-int64(r.inPos)))
	for _, c := range r.cols {
		if err := c.fill(r.cur.Column(c.index), r.inPos, n); err != nil {
			return false, fmt.Errorf("%s: batch %d: column %q: %w", r.name, r.batches, c.name, err)
		}
	}
	r.inPos += n
	r.win = n
	return true, nil
}

// checkBatch checks that an input batch has the mapped columns with the
// types of the input's schema.
func (r *ArrowReader) checkBatch(rec arrow.RecordBatch) error {
	if rec == nil {
		return fmt.Errorf("%s: batch %d: no record batch", r.name, r.batches)
	}
	for _, c := range r.cols {
		if c.index >= int(rec.NumCols()) {
			return fmt.Errorf("%s: batch %d: column %q: missing (the batch has %d columns)", r.name, r.batches, c.name, rec.NumCols())
		}
		col := rec.Column(c.index)
		if !arrow.TypeEqual(col.DataType(), c.typ) {
			return fmt.Errorf("%s: batch %d: column %q: type %v, the schema says %v", r.name, r.batches, c.name, col.DataType(), c.typ)
		}
		if int64(col.Len()) < rec.NumRows() {
			return fmt.Errorf("%s: batch %d: column %q: %d values for %d rows", r.name, r.batches, c.name, col.Len(), rec.NumRows())
		}
	}
	return nil
}

// take checks the window's rows from r.k on and appends up to limit valid
// ones to the builder, as the file readers do; it returns how many.
func (r *ArrowReader) take(limit int) (int, error) {
	p, a, row := r.plan, &r.acct, &r.row
	keep := r.cols[colEvent].keep
	n := 0
	for r.k < r.win && n < limit {
		k := r.k
		r.k++
		for i, c := range r.cols {
			if i == colTS {
				t := &c.ts[k]
				row.ts, row.tsErr, row.cells[i] = t.ns, t.err, t.raw
			} else {
				row.cells[i] = c.cells[k]
			}
		}
		a.rowsRead++
		col, reason := p.check(row)
		switch {
		case reason != nil:
			if err := a.bad(p.badRow(r.name, r.base+int64(k)+1, -1, row, col, reason)); err != nil {
				return n, err
			}
		case keep != nil && !keep[k]:
			a.filtered.add(row.ts)
		default:
			r.bld.append(row)
			n++
			if r.bld.full() {
				return n, nil
			}
		}
	}
	return n, nil
}

// RecordBatch returns the current record batch. It is valid until the next
// call to Next or Close; the ArrowReader releases it. Call Retain to keep
// it longer.
func (r *ArrowReader) RecordBatch() arrow.RecordBatch { return r.rec }

// Record returns the current record batch.
//
// Deprecated: Use RecordBatch; Record is here for array.RecordReader.
func (r *ArrowReader) Record() arrow.RecordBatch { return r.rec }

// Err returns the error that stopped the reader, or nil at a clean end: a
// *RowError, a *BudgetError, or an error naming the stream (the input
// reader's error wrapped, a batch whose columns contradict the schema, a
// dictionary index out of range).
func (r *ArrowReader) Err() error { return r.err }

// Stats returns the counts so far. The slices are the caller's.
func (r *ArrowReader) Stats() Stats { return r.acct.stats() }

// Progress returns the number of rows read so far (Stats.RowsRead as of the
// last batch). It is safe to call from another goroutine.
func (r *ArrowReader) Progress() int64 { return r.progress.Load() }

// Retain adds a reference; Release drops one and closes the reader when
// none are left.
func (r *ArrowReader) Retain() { r.refs.Add(1) }

// Release drops a reference (see Retain).
func (r *ArrowReader) Release() {
	if r.refs.Add(-1) == 0 {
		r.Close()
	}
}

// Close releases the current batches, the dictionaries held and the input
// reader. It does not report read errors; use Err. It always returns nil.
func (r *ArrowReader) Close() error {
	if r.closed {
		return nil
	}
	r.closed = true
	releaseBatch(&r.rec)
	releaseBatch(&r.cur)
	if r.bld != nil {
		r.bld.release()
		r.bld = nil
	}
	for _, c := range r.cols {
		c.setDict(nil)
	}
	r.in.Release()
	return nil
}

// releaseBatch releases the batch *b, if any, and clears *b.
func releaseBatch(b *arrow.RecordBatch) {
	if *b != nil {
		(*b).Release()
		*b = nil
	}
}

// arrowKind says how an input column becomes text or time.
type arrowKind int

const (
	akText    arrowKind = iota + 1 // utf8, large_utf8, utf8_view
	akDict                         // dictionary over text
	akInt                          // integer in decimal
	akTSEpoch                      // integer count of unit nanoseconds
	akTSDate                       // date32: days
)

// arrowColumn reads one mapped column of the input batches, a window of
// rows at a time.
type arrowColumn struct {
	name  string // physical
	index int    // field index in the input schema
	typ   arrow.DataType
	kind  arrowKind
	isTS  bool
	unit  int64    // nanoseconds per unit for akTSEpoch
	p     *plan    // for text timestamps
	evs   *nameSet // the event filter, on the event column

	// The window: cells of a text column (pointing into the input batch,
	// its dictionary or scratch), ts values of the ts column, and the
	// event verdicts when there is a filter.
	cells   []cell
	ts      []arrowTS
	keep    []bool
	ints    []int64
	scratch []byte

	// The dictionary decoded last, retained, with its entries decoded.
	dict     arrow.ArrayData
	dictCell []cell
	dictTS   []arrowTS
	dictKeep []bool
}

// arrowTS is a decoded ts cell: nanoseconds, or the reason it is bad and
// the raw value for the error.
type arrowTS struct {
	ns  int64
	err error
	raw cell
}

// bindArrowColumn finds logical column i, physically named phys, in the
// input schema and decides how to read it.
func bindArrowColumn(stream string, schema *arrow.Schema, phys string, i int, p *plan) (*arrowColumn, error) {
	idx := schema.FieldIndices(phys)
	if len(idx) == 0 {
		var have []string
		for _, f := range schema.Fields() {
			have = append(have, f.Name)
		}
		return nil, &ColumnError{File: stream, Column: phys, Err: ErrMissingColumn,
			Detail: "the stream has: " + nameList(have)}
	}
	if len(idx) > 1 {
		return nil, &ColumnError{File: stream, Column: phys, Err: ErrColumnType,
			Detail: "the schema names it more than once"}
	}
	typ := schema.Field(idx[0]).Type
	c := &arrowColumn{name: phys, index: idx[0], typ: typ, isTS: i == colTS, p: p}
	var detail string
	c.kind, c.unit, detail = arrowColumnKind(typ, c.isTS, p.epochUnit)
	if detail != "" {
		return nil, &ColumnError{File: stream, Column: phys, Err: ErrColumnType, Detail: detail}
	}
	c.cells = make([]cell, arrowWindow) // for a ts column of text, the raw text
	if c.isTS {
		c.ts = make([]arrowTS, arrowWindow)
	}
	if i == colEvent && p.events != nil {
		c.evs = p.events
		c.keep = make([]bool, arrowWindow)
	}
	return c, nil
}

// arrowColumnKind decides how to read a column of type t. For a column it
// cannot read it returns a non-empty detail for the error.
func arrowColumnKind(t arrow.DataType, isTS bool, epochUnit int64) (arrowKind, int64, string) {
	switch {
	case isText(t):
		return akText, 0, ""
	case t.ID() == arrow.DICTIONARY:
		if isText(t.(*arrow.DictionaryType).ValueType) {
			return akDict, 0, ""
		}
	case !isTS && arrow.IsInteger(t.ID()):
		return akInt, 0, ""
	case isTS && arrow.IsInteger(t.ID()) && t.ID() != arrow.UINT64:
		if epochUnit == 0 {
			return 0, 0, "integer timestamps need an epoch unit (s, ms, us or ns)"
		}
		return akTSEpoch, epochUnit, ""
	case isTS && t.ID() == arrow.TIMESTAMP:
		return akTSEpoch, int64(t.(*arrow.TimestampType).Unit.Multiplier()), ""
	case isTS && t.ID() == arrow.DATE64:
		return akTSEpoch, epochUnitNanos("ms"), ""
	case isTS && t.ID() == arrow.DATE32:
		return akTSDate, 0, ""
	}
	if isTS {
		return 0, 0, "cannot read " + t.String() + " as a timestamp"
	}
	return 0, 0, "cannot read " + t.String() + " as text"
}

func isText(t arrow.DataType) bool {
	switch t.ID() {
	case arrow.STRING, arrow.LARGE_STRING, arrow.STRING_VIEW:
		return true
	}
	return false
}

// fill decodes rows [from, from+n) of a, the column's array in the current
// input batch, into the window.
func (c *arrowColumn) fill(a arrow.Array, from, n int) error {
	switch c.kind {
	case akText:
		if c.isTS {
			c.fillTSText(a, from, n)
			return nil
		}
		textCells(a, from, c.cells[:n])
		c.verdicts(n)
	case akDict:
		return c.fillDict(a.(*array.Dictionary), from, n)
	case akInt:
		c.fillInt(a, from, n)
	case akTSEpoch, akTSDate:
		c.fillTSInt(a, from, n)
	}
	return nil
}

// verdicts sets the event verdicts of the window's first n text cells.
func (c *arrowColumn) verdicts(n int) {
	if c.keep == nil {
		return
	}
	for j, v := range c.cells[:n] {
		c.keep[j] = !v.null && c.evs.has(v.s)
	}
}

// textCells sets dst[j] to value from+j of a text array (utf8, large_utf8
// or utf8_view).
func textCells(a arrow.Array, from int, dst []cell) {
	switch a := a.(type) {
	case *array.String:
		textInto(a, from, dst)
	case *array.LargeString:
		textInto(a, from, dst)
	case *array.StringView:
		textInto(a, from, dst)
	}
}

func textInto[A interface {
	IsNull(int) bool
	NullN() int
	Value(int) string
}](a A, from int, dst []cell) {
	nulls := a.NullN() > 0
	for j := range dst {
		if nulls && a.IsNull(from+j) {
			dst[j] = cell{null: true}
		} else {
			dst[j] = cell{s: a.Value(from + j)}
		}
	}
}

// fillInt writes the window of an integer column as decimal text.
func (c *arrowColumn) fillInt(a arrow.Array, from, n int) {
	c.ints = intValues(a, from, n, c.ints)
	unsigned := a.DataType().ID() == arrow.UINT64
	c.scratch = c.scratch[:0]
	nulls := a.NullN() > 0
	for j, v := range c.ints {
		if nulls && a.IsNull(from+j) {
			c.cells[j] = cell{null: true}
			continue
		}
		start := len(c.scratch)
		if unsigned {
			c.scratch = strconv.AppendUint(c.scratch, uint64(v), 10)
		} else {
			c.scratch = strconv.AppendInt(c.scratch, v, 10)
		}
		// The string keeps its backing array alive if scratch grows.
		b := c.scratch[start:]
		c.cells[j] = cell{s: unsafe.String(unsafe.SliceData(b), len(b))}
	}
	c.verdicts(n)
}

// fillTSInt decodes the window of a ts column of integers: epoch counts of
// c.unit (timestamps, date64, plain integers) or days (date32).
func (c *arrowColumn) fillTSInt(a arrow.Array, from, n int) {
	c.ints = intValues(a, from, n, c.ints)
	nulls := a.NullN() > 0
	var d tsDecoder
	if c.kind == akTSEpoch {
		d = epochDecoder(c.unit)
	}
	for j, v := range c.ints {
		switch {
		case nulls && a.IsNull(from+j):
			c.ts[j] = arrowTS{err: ErrNullTimestamp, raw: cell{null: true}}
		case c.kind == akTSDate:
			ns, ok := fromDate(int32(v))
			if !ok {
				c.ts[j] = arrowTS{err: ErrTimestampRange, raw: cell{s: formatSecNsec(v*secPerDay, 0)}}
				continue
			}
			c.ts[j] = arrowTS{ns: ns}
		default:
			ns, raw, err := d.epoch(v).get(&d)
			c.ts[j] = arrowTS{ns: ns, err: err, raw: raw}
		}
	}
}

// fillTSText parses the window of a ts column of text.
func (c *arrowColumn) fillTSText(a arrow.Array, from, n int) {
	cells := c.cells[:n]
	textCells(a, from, cells)
	for j, v := range cells {
		c.ts[j] = c.parseTS(v)
	}
}

// parseTS parses a text ts cell as CSV cells are parsed.
func (c *arrowColumn) parseTS(v cell) arrowTS {
	if v.null {
		return arrowTS{err: ErrNullTimestamp, raw: v}
	}
	ns, err := c.p.parseTSText(v.s)
	if err != nil {
		return arrowTS{err: err, raw: v}
	}
	return arrowTS{ns: ns}
}

// fillDict decodes the window of a dictionary column through its entries,
// each decoded once per dictionary.
func (c *arrowColumn) fillDict(a *array.Dictionary, from, n int) error {
	if d := a.Dictionary(); d.Data() != c.dict {
		c.setDict(d)
	}
	c.ints = intValues(a.Indices(), from, n, c.ints)
	nulls := a.NullN() > 0
	size := int64(len(c.dictCell))
	for j, x := range c.ints {
		null := nulls && a.IsNull(from+j)
		if !null && (x < 0 || x >= size) {
			return fmt.Errorf("dictionary index %d of a dictionary of %d values (row %d of the batch)", x, size, from+j+1)
		}
		switch {
		case c.isTS && null:
			c.ts[j] = arrowTS{err: ErrNullTimestamp, raw: cell{null: true}}
		case c.isTS:
			c.ts[j] = c.dictTS[x]
		case null:
			c.cells[j] = cell{null: true}
		default:
			c.cells[j] = c.dictCell[x]
		}
		if c.keep != nil {
			c.keep[j] = !null && c.dictKeep[x]
		}
	}
	return nil
}

// setDict decodes the entries of dictionary d (nil: none), retaining it
// while its entries are in use, and releases the one before.
func (c *arrowColumn) setDict(d arrow.Array) {
	if c.dict != nil {
		c.dict.Release()
		c.dict = nil
	}
	c.dictCell, c.dictTS, c.dictKeep = c.dictCell[:0], c.dictTS[:0], c.dictKeep[:0]
	if d == nil {
		return
	}
	c.dict = d.Data()
	c.dict.Retain()
	c.dictCell = append(c.dictCell, make([]cell, d.Len())...)
	textCells(d, 0, c.dictCell)
	for _, v := range c.dictCell {
		if c.isTS {
			c.dictTS = append(c.dictTS, c.parseTS(v))
		}
		if c.keep != nil {
			c.dictKeep = append(c.dictKeep, !v.null && c.evs.has(v.s))
		}
	}
}

// intValues returns values [from, from+n) of an integer, timestamp or date
// array as int64, reusing dst (a uint64 keeps its bits). It reads the
// values buffer by the type's width; a buffer too short for the array's
// length panics (Next turns that into an error).
func intValues(a arrow.Array, from, n int, dst []int64) []int64 {
	d := a.Data()
	raw := d.Buffers()[1].Bytes()
	lo := d.Offset() + from
	signed := !arrow.IsUnsignedInteger(a.DataType().ID())
	switch a.DataType().(arrow.FixedWidthDataType).BitWidth() {
	case 8:
		return widen[int8, uint8](dst, raw, lo, n, signed)
	case 16:
		return widen[int16, uint16](dst, raw, lo, n, signed)
	case 32:
		return widen[int32, uint32](dst, raw, lo, n, signed)
	}
	return widen[int64, uint64](dst, raw, lo, n, true)
}

// widen returns values [lo, lo+n) of raw, read as S (as U when not
// signed), as int64 in dst.
func widen[S int8 | int16 | int32 | int64, U uint8 | uint16 | uint32 | uint64](dst []int64, raw []byte, lo, n int, signed bool) []int64 {
	if size := int(unsafe.Sizeof(S(0))); lo < 0 || n < 0 || (lo+n)*size > len(raw) {
		panic(fmt.Sprintf("values [%d, %d) of %d bytes each past a buffer of %d bytes", lo, lo+n, size, len(raw)))
	}
	dst = dst[:0]
	p := unsafe.Pointer(unsafe.SliceData(raw))
	if signed {
		for _, v := range unsafe.Slice((*S)(p), lo+n)[lo:] {
			dst = append(dst, int64(v))
		}
		return dst
	}
	for _, v := range unsafe.Slice((*U)(p), lo+n)[lo:] {
		dst = append(dst, int64(v))
	}
	return dst
}
