package ingest

import (
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
	"github.com/apache/arrow-go/v18/arrow/memory"
	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/format"

	"github.com/armtally/armtally/experiment"
)

// ColumnMap maps one logical column (a metric or a segment dimension
// name) to the physical column that holds it.
type ColumnMap struct {
	Logical, Physical string
}

// UnitTableOptions configures a reader of the unit table (one row per
// unit: experiment.UnitTableTallier describes the rules). Physical column
// names are looked up in the file's header or Parquet schema (a dotted
// path names a field inside a group).
type UnitTableOptions struct {
	// Unit and Arm name the unit key and arm columns; both required.
	Unit, Arm string
	// TS names the exposure time column; "" when the table has none.
	TS string
	// EpochUnit is the unit of integer exposure times: s, ms, us or ns,
	// as for the event log (Mapping.EpochUnit).
	EpochUnit string
	// Metrics maps each metric name to its 0/1 column.
	Metrics []ColumnMap
	// Segments maps each segment dimension to its column.
	Segments []ColumnMap
	// BatchSize is the most rows per record batch; 0 means
	// DefaultBatchSize.
	BatchSize int
	// Allocator allocates the record batches; nil means
	// memory.DefaultAllocator.
	Allocator memory.Allocator
}

// CountsOptions configures a reader of a counts table (one row per arm,
// segment values and metric: experiment.CountsTallier describes the
// rules).
type CountsOptions struct {
	// Arm, Metric, Units and Conversions name the required columns;
	// Immature names the optional column of immature units ("" for none).
	Arm, Metric, Units, Conversions, Immature string
	// Segments maps each segment dimension to its column.
	Segments []ColumnMap
	// Metrics lists the experiment's metric names; a row naming another
	// metric is bad (ErrUnknownMetric). Empty: not checked here.
	Metrics []string
	// BatchSize and Allocator are as in UnitTableOptions.
	BatchSize int
	Allocator memory.Allocator
}

// colKind says how a table column is read and checked.
type colKind int

const (
	colKey   colKind = iota + 1 // text, non-null, non-empty
	colText                     // text, nullable; empty is null
	colTime                     // exposure time
	colFlag                     // conversion flag
	colCount                    // whole number >= 0
)

type tableCol struct {
	logical, physical string
	kind              colKind
}

// tablePlan is the layout of one table shape: its columns in output order
// and the checks that span columns.
type tablePlan struct {
	shape     string // "unit table" or "counts table", for errors
	cols      []tableCol
	epochUnit int64
	schema    *arrow.Schema
	// Counts tables only: column positions, known metrics and the cells
	// seen (key to the position of the first row).
	counts    bool
	arm       int
	metric    int
	units     int
	conv      int
	segs      []int
	metrics   map[string]bool
	seenCells map[string]string
}

func (p *tablePlan) add(logical, physical string, kind colKind) int {
	p.cols = append(p.cols, tableCol{logical, physical, kind})
	return len(p.cols) - 1
}

// finish checks the names and builds the Arrow schema.
func (p *tablePlan) finish() error {
	logical := map[string]bool{}
	for _, c := range p.cols {
		if c.physical == "" {
			return fmt.Errorf("%s column mapping: no column named for %q", p.shape, c.logical)
		}
		if c.logical == "" {
			return fmt.Errorf("%s column mapping: a column %q with no logical name", p.shape, c.physical)
		}
		if logical[c.logical] {
			return fmt.Errorf("%s column mapping: %q named twice (metrics, segment dimensions and the fixed columns need distinct names)", p.shape, c.logical)
		}
		logical[c.logical] = true
	}
	fields := make([]arrow.Field, len(p.cols))
	for i, c := range p.cols {
		f := arrow.Field{Name: c.logical}
		switch c.kind {
		case colKey:
			f.Type = arrow.BinaryTypes.String
		case colText:
			f.Type, f.Nullable = arrow.BinaryTypes.String, true
		case colTime:
			f.Type = &arrow.TimestampType{Unit: arrow.Nanosecond, TimeZone: "UTC"}
		case colFlag:
			f.Type = arrow.FixedWidthTypes.Boolean
		case colCount:
			f.Type = arrow.PrimitiveTypes.Int64
		}
		fields[i] = f
	}
	p.schema = arrow.NewSchema(fields, nil)
	return nil
}

func newUnitTablePlan(o UnitTableOptions) (*tablePlan, error) {
	p := &tablePlan{shape: "unit table"}
	if o.EpochUnit != "" {
		if p.epochUnit = epochUnitNanos(o.EpochUnit); p.epochUnit == 0 {
			return nil, fmt.Errorf("epoch unit %q: want s, ms, us or ns", o.EpochUnit)
		}
	}
	p.add(experiment.ColUser, o.Unit, colKey)
	p.add(experiment.ColArm, o.Arm, colKey)
	if o.TS != "" {
		p.add(experiment.ColTS, o.TS, colTime)
	}
	if len(o.Metrics) == 0 {
		return nil, errors.New("unit table column mapping: no metric columns")
	}
	for _, m := range o.Metrics {
		p.add(m.Logical, m.Physical, colFlag)
	}
	for _, s := range o.Segments {
		p.add(s.Logical, s.Physical, colText)
	}
	return p, p.finish()
}

func newCountsPlan(o CountsOptions) (*tablePlan, error) {
	p := &tablePlan{shape: "counts table", counts: true, seenCells: map[string]string{}}
	p.arm = p.add(experiment.ColArm, o.Arm, colKey)
	for _, s := range o.Segments {
		p.segs = append(p.segs, p.add(s.Logical, s.Physical, colText))
	}
	p.metric = p.add(experiment.ColMetric, o.Metric, colKey)
	p.units = p.add(experiment.ColUnits, o.Units, colCount)
	p.conv = p.add(experiment.ColConversions, o.Conversions, colCount)
	if o.Immature != "" {
		p.add(experiment.ColImmature, o.Immature, colCount)
	}
	if len(o.Metrics) > 0 {
		p.metrics = map[string]bool{}
		for _, m := range o.Metrics {
			p.metrics[m] = true
		}
	}
	return p, p.finish()
}

// tval is one decoded cell.
type tval struct {
	null bool
	s    string // colKey, colText; the raw text for errors otherwise
	n    int64  // colTime (nanoseconds), colCount
	b    bool   // colFlag
	err  error  // a decoding error (a row sentinel)
}

// parseFlag reads a conversion flag written as text.
func parseFlag(s string) (bool, bool) {
	switch strings.ToLower(s) {
	case "1", "true", "yes":
		return true, true
	case "0", "false", "no":
		return false, true
	}
	return false, false
}

// textCell decodes a text cell (CSV, or a Parquet text column) for kind.
func (p *tablePlan) textCell(kind colKind, s string) tval {
	v := tval{s: s}
	if s == "" {
		v.null = true
		if kind == colTime {
			v.err = ErrNullTimestamp
		}
		return v
	}
	switch kind {
	case colTime:
		v.n, v.err = parseTSText(s, p.epochUnit)
	case colFlag:
		var ok bool
		if v.b, ok = parseFlag(s); !ok {
			v.err = ErrBadFlag
		}
	case colCount:
		x, err := strconv.ParseInt(s, 10, 64)
		if err != nil || x < 0 {
			v.err = ErrBadCount
		}
		v.n = x
	}
	return v
}

// check decides whether a decoded row is good: it returns the column at
// fault and the reason, or -1 and nil. pos names the row for a duplicate.
func (p *tablePlan) check(row []tval, pos string) (int, error) {
	for i, c := range p.cols {
		v := row[i]
		if v.err != nil {
			return i, v.err
		}
		if v.null && c.kind != colText {
			if c.kind == colTime {
				return i, ErrNullTimestamp
			}
			return i, ErrNullCell
		}
	}
	if !p.counts {
		return -1, nil
	}
	if row[p.conv].n > row[p.units].n {
		return p.conv, ErrTooMany
	}
	if p.metrics != nil && !p.metrics[row[p.metric].s] {
		return p.metric, ErrUnknownMetric
	}
	var key strings.Builder
	for _, i := range append(append([]int{p.arm}, p.segs...), p.metric) {
		if row[i].null {
			key.WriteString("null,")
		} else {
			key.WriteString(strconv.Quote(row[i].s) + ",")
		}
	}
	if first, dup := p.seenCells[key.String()]; dup {
		return p.metric, fmt.Errorf("%w (%s)", ErrDuplicateCell, first)
	}
	p.seenCells[key.String()] = pos
	return -1, nil
}

// appendRow adds a good row to the builders.
func appendRow(b *array.RecordBuilder, p *tablePlan, row []tval) {
	for i, c := range p.cols {
		v := row[i]
		switch c.kind {
		case colKey, colText:
			sb := b.Field(i).(*array.StringBuilder)
			if v.null {
				sb.AppendNull()
			} else {
				sb.Append(v.s)
			}
		case colTime:
			b.Field(i).(*array.TimestampBuilder).Append(arrow.Timestamp(v.n))
		case colFlag:
			b.Field(i).(*array.BooleanBuilder).Append(v.b)
		case colCount:
			b.Field(i).(*array.Int64Builder).Append(v.n)
		}
	}
}

// rowError builds the error of a bad row.
func (p *tablePlan) rowError(file string, pos int64, rowGroup int, row []tval, col int, reason error) *RowError {
	e := &RowError{File: file, Row: pos, RowGroup: rowGroup, Column: p.cols[col].physical, Err: reason}
	if v := row[col]; !v.null || v.s != "" {
		e.Value = strings.Clone(v.s)
	}
	if errors.Is(reason, ErrTooMany) {
		e.Value = fmt.Sprintf("%d conversions of %d units", row[p.conv].n, row[p.units].n)
	}
	return e
}

// tableSource reads the rows of one source.
type tableSource interface {
	// read appends up to limit good rows to b; at the end of the source
	// it returns io.EOF.
	read(b *array.RecordBuilder, limit int) (int, int64, error)
	close() error
}

// TableReader reads unit tables or counts tables from CSV and Parquet
// sources and returns their rows as Arrow record batches of the logical
// table of its shape (see package experiment): the unit table's user,
// arm, optional ts, one bool column per metric and the segment columns,
// or the counts table's arm, segment columns, metric, units, conversions
// and optional immature.
//
// Cells are converted as they are read. Text: CSV cells as they are (no
// trimming); Parquet strings, integers (in decimal, so an integer unit id
// becomes its digits) and booleans. Conversion flags: 0/1, true/false or
// yes/no in any case, as text, integers or booleans. Counts: whole numbers
// 0 or more, as text, integers, whole floating-point values or decimals.
// Exposure times: every form the event log accepts (ParseTimestamp text,
// Parquet TIMESTAMP, DATE, INT96, integers with an epoch unit). An empty
// segment cell is null; an empty cell anywhere else is a bad row.
//
// The first bad row stops the reader: Next returns false and Err returns a
// *RowError naming the file, the line (CSV) or row and row group
// (Parquet), the physical column and the value. Counts tables are also
// checked across rows: a second row with the same arm, segment values and
// metric is bad (ErrDuplicateCell), naming the first. CSV files are opened
// by OpenCSV (gzip-compressed ones are told by their first bytes). A
// TableReader is not safe for concurrent use; it is an array.RecordReader.
type TableReader struct {
	batchState
	sources   []Source
	plan      *tablePlan
	mem       memory.Allocator
	batchSize int
	next      int
	cur       tableSource
	bld       *array.RecordBuilder
	stats     Stats
}

// NewUnitTableReader returns a reader of unit tables. It checks the
// options and the extensions of the sources but opens no file.
func NewUnitTableReader(sources []Source, opts UnitTableOptions) (*TableReader, error) {
	p, err := newUnitTablePlan(opts)
	if err != nil {
		return nil, err
	}
	return newTableReader(sources, p, opts.BatchSize, opts.Allocator)
}

// NewCountsReader returns a reader of counts tables. It checks the options
// and the extensions of the sources but opens no file.
func NewCountsReader(sources []Source, opts CountsOptions) (*TableReader, error) {
	p, err := newCountsPlan(opts)
	if err != nil {
		return nil, err
	}
	return newTableReader(sources, p, opts.BatchSize, opts.Allocator)
}

func newTableReader(sources []Source, p *tablePlan, batchSize int, mem memory.Allocator) (*TableReader, error) {
	for _, s := range sources {
		if s.kind != FormatCSV && s.kind != FormatParquet {
			return nil, fmt.Errorf("%s: unknown file type (want %s)", s.Name, knownTypes)
		}
	}
	if mem == nil {
		mem = memory.DefaultAllocator
	}
	if batchSize == 0 {
		batchSize = DefaultBatchSize
	}
	if batchSize < 0 {
		return nil, fmt.Errorf("batch size %d: must be positive", batchSize)
	}
	r := &TableReader{sources: sources, plan: p, mem: mem, batchSize: batchSize}
	r.close = r.Close
	return r, nil
}

// Schema returns the schema of the record batches.
func (r *TableReader) Schema() *arrow.Schema { return r.plan.schema }

// Next advances to the next record batch and reports whether there is one.
// A batch holds rows of one source, in file order.
func (r *TableReader) Next() bool {
	if !r.advance() {
		return false
	}
	if r.bld == nil {
		r.bld = array.NewRecordBuilder(r.mem, r.plan.schema)
	}
	for {
		if r.cur == nil {
			if r.next >= len(r.sources) {
				return false
			}
			src := r.sources[r.next]
			r.next++
			cur, err := openTableSource(src, r.plan)
			if err != nil {
				r.err = err
				return false
			}
			r.stats.Files++
			r.cur = cur
		}
		n, read, err := r.cur.read(r.bld, r.batchSize)
		r.stats.RowsRead += read
		if err == io.EOF {
			err = r.cur.close()
			r.cur = nil
		}
		if err != nil {
			r.bld.NewRecordBatch().Release()
			r.err = err
			return false
		}
		if n > 0 {
			r.rec = r.bld.NewRecordBatch()
			r.stats.Rows += int64(n)
			return true
		}
	}
}

// Stats returns the counts so far: files opened, rows read, rows
// delivered (BadRows stays empty: the first bad row stops the reader).
func (r *TableReader) Stats() Stats { return r.stats }

// Close releases the current batch and closes the open source.
func (r *TableReader) Close() error {
	if !r.shut() {
		return nil
	}
	if r.bld != nil {
		r.bld.Release()
		r.bld = nil
	}
	if r.cur != nil {
		err := r.cur.close()
		r.cur = nil
		return err
	}
	return nil
}

func openTableSource(src Source, p *tablePlan) (tableSource, error) {
	return openAs(src,
		func(o *openedSource) (tableSource, error) { return newCSVTable(src, o, p) },
		func(o *openedSource) (tableSource, error) { return newParquetTable(src.Name, o, p) })
}

// csvTable reads one CSV source of a table, opened by openCSV.
type csvTable struct {
	file  string
	f     *CSVFile
	p     *tablePlan
	field []int
	nhead int
	row   []tval
}

func newCSVTable(src Source, o *openedSource, p *tablePlan) (*csvTable, error) {
	f, err := openCSV(src.Name, o, 0)
	if err != nil {
		return nil, err
	}
	c := &csvTable{file: src.Name, f: f, p: p, nhead: len(f.Header())}
	c.field = make([]int, len(p.cols))
	for i, col := range p.cols {
		if c.field[i], err = f.column(col.physical); err == nil && c.field[i] < 0 {
			err = missingColumn(src.Name, col.physical, f.Header(), nil)
		}
		if err != nil {
			return nil, err
		}
	}
	c.row = make([]tval, len(p.cols))
	return c, nil
}

func (c *csvTable) read(b *array.RecordBuilder, limit int) (int, int64, error) {
	n, read := 0, int64(0)
	for n < limit {
		rec, err := c.f.Read()
		if err != nil {
			return n, read, err
		}
		read++
		if len(rec) != c.nhead {
			return n, read, &RowError{File: c.file, Row: int64(c.f.Line(0)), RowGroup: -1, Err: ErrFieldCount,
				Value: strconv.Itoa(len(rec)), wantFields: c.nhead}
		}
		for i, j := range c.field {
			c.row[i] = c.p.textCell(c.p.cols[i].kind, rec[j])
		}
		if col, reason := c.p.check(c.row, "line "+strconv.Itoa(c.f.Line(0))); reason != nil {
			return n, read, c.p.rowError(c.file, int64(c.f.Line(c.field[col])), -1, c.row, col, reason)
		}
		appendRow(b, c.p, c.row)
		n++
	}
	return n, read, nil
}

func (c *csvTable) close() error { return c.f.Close() }

// pqKind says how a Parquet leaf becomes a cell.
type pqKind int

const (
	pqText    pqKind = iota + 1 // BYTE_ARRAY text
	pqInt                       // signed INT32 or INT64
	pqUint                      // unsigned INT32 or INT64
	pqBool                      // BOOLEAN
	pqFloat                     // FLOAT or DOUBLE (counts)
	pqDecimal                   // INT32 or INT64 DECIMAL (counts)
	pqTime                      // a timestamp form of the event log
)

// pqTableCol is one mapped column of a Parquet table.
type pqTableCol struct {
	index int // leaf column index
	kind  pqKind
	ts    tsDecoder // for pqTime
	scale int32     // for pqDecimal
}

// parquetTable reads one Parquet source of a table with parquet-go, row
// group by row group.
type parquetTable struct {
	file    string
	src     *openedSource
	pf      *parquet.File
	p       *tablePlan
	cols    []pqTableCol
	byLeaf  map[int]int // leaf column index -> position in p.cols
	rg      int
	rows    parquet.Rows
	rowBase int64 // rows of the file before the current row group
	rgDone  int64
	buf     []parquet.Row
	bufN    int
	bufPos  int
	row     []tval
}

func newParquetTable(file string, o *openedSource, p *tablePlan) (pt *parquetTable, err error) {
	var pf *parquet.File
	func() {
		defer func() {
			if v := recover(); v != nil {
				err = fmt.Errorf("%s: corrupt parquet file: %w reading the footer: %v", file, errPanicked, v)
			}
		}()
		pf, err = parquet.OpenFile(o.r, o.size, parquet.SkipPageIndex(true), parquet.SkipBloomFilters(true))
	}()
	if err != nil {
		if !errors.Is(err, errPanicked) {
			err = fmt.Errorf("%s: %w", file, err)
		}
		return nil, err
	}
	t := &parquetTable{file: file, src: o, pf: pf, p: p, rg: -1, byLeaf: map[int]int{},
		buf: make([]parquet.Row, 256), row: make([]tval, len(p.cols))}
	schema := pf.Schema()
	var top []string
	for _, f := range schema.Fields() {
		top = append(top, f.Name())
	}
	for i, c := range p.cols {
		leaf, ok := lookupLeaf(schema, c.physical)
		if !ok {
			return nil, missingColumn(file, c.physical, top, nil)
		}
		if leaf.MaxRepetitionLevel > 0 {
			return nil, &ColumnError{File: file, Column: c.physical, Err: ErrColumnType, Detail: "a repeated column"}
		}
		if _, dup := t.byLeaf[leaf.ColumnIndex]; dup {
			return nil, &ColumnError{File: file, Column: c.physical, Err: ErrColumnType, Detail: "mapped to two logical columns"}
		}
		pc, detail := pqColumnKind(leaf.Node.Type(), c.kind, p.epochUnit)
		if detail != "" {
			return nil, &ColumnError{File: file, Column: c.physical, Err: ErrColumnType, Detail: detail}
		}
		pc.index = leaf.ColumnIndex
		t.cols = append(t.cols, pc)
		t.byLeaf[leaf.ColumnIndex] = i
	}
	return t, nil
}

// pqColumnKind decides how to read a leaf of type t as a column of kind.
func pqColumnKind(t parquet.Type, kind colKind, epochUnit int64) (pqTableCol, string) {
	if kind == colTime {
		ts, detail := newTSDecoder(t, epochUnit)
		return pqTableCol{kind: pqTime, ts: ts}, detail
	}
	lt, _, _ := typeNames(t)
	if d, ok := lt.(*format.DecimalType); ok {
		if kind == colCount && (t.Kind() == parquet.Int32 || t.Kind() == parquet.Int64) {
			return pqTableCol{kind: pqDecimal, scale: d.Scale}, ""
		}
		return pqTableCol{}, "cannot read " + t.String() + " here (cast it to BIGINT)"
	}
	switch t.Kind() {
	case parquet.Float, parquet.Double:
		if kind == colCount {
			return pqTableCol{kind: pqFloat}, ""
		}
		return pqTableCol{}, "cannot read " + t.String() + " here"
	}
	tk, detail := textKind(t)
	if detail != "" {
		return pqTableCol{}, detail
	}
	switch tk {
	case kindBytes:
		return pqTableCol{kind: pqText}, ""
	case kindInt32, kindInt64:
		return pqTableCol{kind: pqInt}, ""
	case kindUint32, kindUint64:
		return pqTableCol{kind: pqUint}, ""
	case kindBool:
		return pqTableCol{kind: pqBool}, ""
	}
	return pqTableCol{}, "cannot read " + t.String()
}

// cell decodes one Parquet value of column i.
func (t *parquetTable) cell(i int, v parquet.Value) tval {
	c, kind := t.cols[i], t.p.cols[i].kind
	if v.IsNull() {
		if kind == colTime {
			return tval{null: true, err: ErrNullTimestamp}
		}
		return tval{null: true}
	}
	switch c.kind {
	case pqText:
		return t.p.textCell(kind, string(v.ByteArray()))
	case pqBool:
		b := v.Boolean()
		if kind == colFlag || kind == colCount {
			out := tval{s: strconv.FormatBool(b), b: b}
			if kind == colCount {
				out.err = ErrBadCount
			}
			return out
		}
		return tval{s: strconv.FormatBool(b)}
	case pqInt, pqUint:
		var x int64
		var s string
		if v.Kind() == parquet.Int32 {
			x = int64(v.Int32())
			if c.kind == pqUint {
				x = int64(uint32(v.Int32()))
			}
		} else {
			x = v.Int64()
		}
		s = strconv.FormatInt(x, 10)
		if c.kind == pqUint && v.Kind() == parquet.Int64 {
			s = strconv.FormatUint(uint64(v.Int64()), 10)
			if x < 0 { // above MaxInt64
				return tval{s: s, err: ErrBadCount}
			}
		}
		return t.p.textCell(kind, s)
	case pqFloat:
		f := v.Double()
		if v.Kind() == parquet.Float {
			f = float64(v.Float())
		}
		s := strconv.FormatFloat(f, 'g', -1, 64)
		if f != math.Trunc(f) || f < 0 || f > 1<<53 {
			return tval{s: s, err: ErrBadCount}
		}
		return tval{s: s, n: int64(f)}
	case pqDecimal:
		x := v.Int64()
		if v.Kind() == parquet.Int32 {
			x = int64(v.Int32())
		}
		s := strconv.FormatInt(x, 10)
		for range c.scale {
			if x%10 != 0 {
				return tval{s: s + fmt.Sprintf("e-%d", c.scale), err: ErrBadCount}
			}
			x /= 10
		}
		if x < 0 {
			return tval{s: s, err: ErrBadCount}
		}
		return tval{s: s, n: x}
	case pqTime:
		return t.timeCell(c, v)
	}
	return tval{err: ErrBadTimestamp}
}

// timeCell decodes an exposure time in any of the event log's forms.
func (t *parquetTable) timeCell(c pqTableCol, v parquet.Value) tval {
	ns, raw, err := c.ts.decode(v)
	return tval{n: ns, err: err, s: raw.s, null: raw.null}
}

func (t *parquetTable) read(b *array.RecordBuilder, limit int) (n int, read int64, err error) {
	defer func() {
		if v := recover(); v != nil {
			err = fmt.Errorf("%s: row group %d: corrupt parquet data: %w: %v", t.file, t.rg, errPanicked, v)
		}
	}()
	groups := t.pf.RowGroups()
	for n < limit {
		if t.bufPos >= t.bufN {
			if t.rows == nil {
				if t.rg >= 0 {
					t.rowBase += t.rgDone
				}
				t.rg++
				if t.rg >= len(groups) {
					return n, read, io.EOF
				}
				t.rows, t.rgDone = groups[t.rg].Rows(), 0
			}
			k, err := t.rows.ReadRows(t.buf)
			t.bufN, t.bufPos = k, 0
			if err == io.EOF || (err == nil && k == 0) {
				t.rows.Close()
				t.rows = nil
				if k == 0 {
					continue
				}
			} else if err != nil {
				return n, read, fmt.Errorf("%s: row group %d: %w", t.file, t.rg, err)
			}
		}
		pr := t.buf[t.bufPos]
		t.bufPos++
		t.rgDone++
		read++
		for i := range t.row {
			t.row[i] = tval{null: true}
		}
		for _, v := range pr {
			if i, ok := t.byLeaf[v.Column()]; ok {
				t.row[i] = t.cell(i, v)
			}
		}
		pos := t.rowBase + t.rgDone
		if col, reason := t.p.check(t.row, "row "+strconv.FormatInt(pos, 10)); reason != nil {
			return n, read, t.p.rowError(t.file, pos, t.rg, t.row, col, reason)
		}
		appendRow(b, t.p, t.row)
		n++
	}
	return n, read, nil
}

func (t *parquetTable) close() error {
	if t.rows != nil {
		t.rows.Close()
		t.rows = nil
	}
	return t.src.Close()
}
