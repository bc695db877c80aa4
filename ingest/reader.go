package ingest

import (
	"errors"
	"fmt"
	"io"
	"runtime"
	"strings"
	"sync/atomic"
	"unicode/utf8"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/memory"

	"github.com/armtally/armtally/experiment"
)

// Mapping names the physical columns that hold the logical columns.
//
// A name that is not a column of a file but is one of its source's partition
// keys (see Source.Partitions) takes the partition's value on every row of
// that file, for any logical column (a ts partition value is parsed like a
// CSV cell). When a file has a column of that name and a partition key of
// the same name, the file's column wins: the rows are what was written, the
// folder name may be stale. A name that is neither is a missing column
// (ErrMissingColumn) naming the file.
type Mapping struct {
	// Physical column names. Experiment and Arm may be "" when the data
	// has no such column; the logical table then lacks it too.
	User, TS, Event, Experiment, Arm string
	// Segments are physical columns read as segment dimensions. Each
	// becomes a nullable utf8 column of the same name.
	Segments []string
	// EpochUnit is the unit of integer timestamps: "s", "ms", "us" or
	// "ns". It applies to integer Parquet columns without a TIMESTAMP or
	// DATE annotation and to text (CSV cells, Parquet strings, partition
	// values) that is a plain integer. With "" such a Parquet column is an
	// error that asks for a unit, and such text is a bad timestamp.
	EpochUnit string
}

// DefaultMapping returns the mapping for columns named user_id, ts, event,
// experiment and arm, with no segments and no epoch unit.
func DefaultMapping() Mapping {
	return Mapping{User: "user_id", TS: "ts", Event: "event", Experiment: "experiment", Arm: "arm"}
}

// NoLimit as Options.MaxBadRows skips and counts every bad row.
const NoLimit = -1

// Options configures a Reader.
type Options struct {
	Mapping Mapping
	// ExposureEvent is the event name of exposure rows. Such a row must
	// carry a non-empty arm; otherwise it is bad (ErrNoArm). "" turns the
	// check off. Setting it requires Mapping.Arm.
	ExposureEvent string
	// PlannedArms, when not empty, lists the planned arms per experiment
	// key: an exposure row whose experiment key (its experiment cell; ""
	// when there is no experiment column) is in the map and whose arm is
	// not among that key's arms is bad (ErrUnknownArm). The key "" also
	// applies to exposure rows of any key not in the map. Exposure rows of
	// other experiments are not checked.
	PlannedArms map[string][]string
	// BatchSize is the most rows per record batch; 0 means 65536.
	BatchSize int
	// Allocator allocates the record batches; nil means
	// memory.DefaultAllocator.
	Allocator memory.Allocator
	// Delimiter separates CSV fields; 0 means ','. It may be '\t' or any
	// other rune except '"', '\r', '\n' and utf8.RuneError.
	Delimiter rune
	// Events, when not empty, lists the event names the caller needs
	// (the filter pushed down from the tallies): a valid row whose event
	// is not listed is checked like any other row, counted in
	// Stats.Filtered (and its ts in Stats.FilteredMaxTS) and left out of
	// the batches. Bad rows are bad whatever their event.
	Events []string
	// Workers is the most goroutines that decode the row groups of a
	// Parquet file at once; 0 means runtime.GOMAXPROCS(0). Batches still
	// come in file order and the first bad row is the same as with one.
	Workers int

	// MaxBadRows and MaxBadShare are the error budget. With both zero (the
	// default) the first bad row stops the reader with its *RowError.
	// Otherwise bad rows are left out of the batches and counted by reason
	// in Stats, and the reader stops with a *BudgetError
	//
	//   - as soon as the bad rows number more than MaxBadRows, when it is
	//     positive (NoLimit, -1, sets no count limit);
	//   - at the end of the input, when the bad rows are more than
	//     MaxBadShare of the rows read, when it is positive (a share can only
	//     be judged once every row is in: rows still to come could bring it
	//     under). 1 allows any share.
	//
	// So MaxBadRows: NoLimit alone skips every bad row and only counts it.
	// A malformed CSV file (a bare or unclosed quote) or a corrupt Parquet
	// file is not a bad row: it always stops the reader.
	MaxBadRows  int64
	MaxBadShare float64

	// DictionaryColumns makes the event, experiment and arm columns of
	// the record batches dictionary-encoded (int32 indices over utf8
	// values, one dictionary per batch) instead of utf8: their values
	// are few and repeat on every row, so a consumer can decide once per
	// value and skip copying the text of every row. The values are the
	// same either way. The Parquet reader takes the indices from the
	// file's own dictionary pages.
	DictionaryColumns bool

	// rowByRow makes Parquet files be read row by row and CSV files by
	// one encoding/csv reader, on one goroutine, for tests that compare
	// the paths.
	rowByRow bool
	// csvChunk is the size of the chunks of the parallel CSV path; 0
	// means defaultCSVChunk. Tests make it small.
	csvChunk int
}

// DefaultBatchSize is the number of rows per record batch when
// Options.BatchSize is 0.
const DefaultBatchSize = 65536

// Stats counts what a Reader has read so far.
type Stats struct {
	// Files is the number of sources opened.
	Files int
	// RowsRead is the number of data rows taken from the sources, valid
	// or not (the bad row that stopped the reader included).
	RowsRead int64
	// Rows is the number of rows delivered in record batches.
	Rows int64
	// Filtered is the number of valid rows left out because their event
	// is not in Options.Events. FilteredMaxTS is the largest ts among
	// them (Unix nanoseconds) when Filtered > 0.
	Filtered      int64
	FilteredMaxTS int64
	// BadRows counts the bad rows by reason (the Reason constants), in the
	// order of those constants, leaving out reasons with no rows. It
	// includes a bad row that stopped the reader. After a clean end,
	// RowsRead = Rows + Filtered + the sum of BadRows.
	BadRows []BadRowCount
	// BadRowExamples holds the first bad row of each reason:
	// BadRowExamples[i] is the first of BadRows[i].Reason.
	BadRowExamples []*RowError
}

// Reader reads sources one after another and returns their rows as Arrow
// record batches of the logical event table (see package experiment):
//
//	user        utf8, non-null, non-empty
//	ts          timestamp[ns, tz=UTC], non-null
//	event       utf8, non-null, non-empty
//	experiment  utf8, nullable             only when Mapping.Experiment is set
//	arm         utf8, nullable             only when Mapping.Arm is set
//	<segment>   utf8, nullable             one per Mapping.Segments entry
//
// An empty experiment, arm or segment value becomes null. A batch holds rows
// of one source only, in file order. Without an error budget the first bad
// row stops the reader: Next returns false and Err returns a *RowError; with
// one (Options.MaxBadRows, MaxBadShare) bad rows are skipped and counted.
// Sources are opened one at a time, when their first row is needed.
//
// A Reader is not safe for concurrent use.
type Reader struct {
	batchState
	sources   []Source
	plan      *plan
	mem       memory.Allocator
	batchSize int
	workers   int

	next  int        // index of the next source to open
	cur   fileReader // the source being read, or nil
	bld   *batchBuilder
	acct  accounting
	ended bool // the end-of-input budget check is done

	progress atomic.Int64 // rows read, as of the last batch (see Progress)

	// The next sources, opened while the current one is read (see
	// readAhead), each with the error opening it, reported when the
	// reader reaches it.
	ahead []openedFile
}

// workerBatches is a fileReader whose workers make the record batches
// (the Parquet bulk path, the parallel CSV path).
type workerBatches interface {
	// batched reports whether this file is read so, by nextBatch.
	batched() bool
	// nextBatch returns the file's next batch in order, or io.EOF
	// after the last, counting its rows and bad rows in a.
	nextBatch(workers int, a *accounting) (arrow.RecordBatch, error)
}

// openedFile is a source opened ahead, or the error opening it.
type openedFile struct {
	fr  fileReader
	err error
}

// fileReader reads the rows of one source.
type fileReader interface {
	// read appends up to max valid rows to b and returns how many it
	// appended. It counts every row in a and reports each bad one to
	// a.bad, stopping when that returns an error. At the end of the
	// source it returns io.EOF (n may be > 0).
	read(b *batchBuilder, max int, a *accounting) (n int, err error)
	close() error
}

// NewReader returns a reader over sources. It checks the options and the
// sources' extensions but opens no file: a missing column or a corrupt file
// is reported by Err once Next reaches that source.
func NewReader(sources []Source, opts Options) (*Reader, error) {
	for _, s := range sources {
		if s.kind == 0 {
			return nil, fmt.Errorf("%s: unknown file type (want %s)", s.Name, knownTypes)
		}
	}
	p, err := newPlan(opts)
	if err != nil {
		return nil, err
	}
	mem := opts.Allocator
	if mem == nil {
		mem = memory.DefaultAllocator
	}
	bs := opts.BatchSize
	if bs == 0 {
		bs = DefaultBatchSize
	}
	if bs < 0 {
		return nil, fmt.Errorf("batch size %d: must be positive", bs)
	}
	if opts.MaxBadRows < NoLimit {
		return nil, fmt.Errorf("max bad rows %d: want a positive count, 0 or %d (no limit)", opts.MaxBadRows, NoLimit)
	}
	if !(opts.MaxBadShare >= 0 && opts.MaxBadShare <= 1) { // also NaN
		return nil, fmt.Errorf("max bad share %v: want a share from 0 to 1", opts.MaxBadShare)
	}
	if opts.Workers < 0 {
		return nil, fmt.Errorf("workers %d: must not be negative", opts.Workers)
	}
	r := &Reader{sources: sources, plan: p, mem: mem, batchSize: bs, workers: opts.Workers}
	r.close = r.Close
	r.bld = newBatchBuilder(mem, p)
	if r.workers == 0 {
		r.workers = runtime.GOMAXPROCS(0)
	}
	r.acct.budget = opts.MaxBadRows != 0 || opts.MaxBadShare != 0
	r.acct.maxRows = max(opts.MaxBadRows, 0)
	r.acct.maxShare = opts.MaxBadShare
	return r, nil
}

// Schema returns the schema of the record batches.
func (r *Reader) Schema() *arrow.Schema { return r.plan.schema }

// Next advances to the next record batch and reports whether there is one.
// It returns false at the end of the input and on the first error.
func (r *Reader) Next() bool {
	if !r.advance() {
		return false
	}
	for {
		if r.cur == nil {
			if r.next >= len(r.sources) && len(r.ahead) == 0 {
				if !r.ended {
					r.ended = true
					r.err = r.acct.endCheck()
				}
				return false
			}
			var fr fileReader
			var err error
			if len(r.ahead) > 0 {
				fr, err = r.ahead[0].fr, r.ahead[0].err
				r.ahead = r.ahead[1:]
			} else {
				src := r.sources[r.next]
				r.next++
				fr, err = r.open(src)
			}
			if err != nil {
				r.err = err
				return false
			}
			r.acct.files++
			r.cur = fr
		}
		if br, ok := r.cur.(workerBatches); ok && br.batched() {
			rec, err := br.nextBatch(r.workers, &r.acct)
			if err == nil || err == io.EOF {
				r.readAhead()
			}
			r.progress.Store(r.acct.rowsRead)
			if err == io.EOF {
				err = r.cur.close()
				r.cur = nil
				if err == nil {
					continue
				}
			}
			if err != nil {
				r.err = err
				return false
			}
			r.rec = rec
			r.acct.rows += rec.NumRows()
			return true
		}
		n, err := r.cur.read(r.bld, r.batchSize, &r.acct)
		if err == io.EOF {
			err = r.cur.close()
			r.cur = nil
		}
		if err != nil {
			r.bld.discard()
			r.err = err
			return false
		}
		r.progress.Store(r.acct.rowsRead)
		if n > 0 {
			r.rec = r.bld.newRecord()
			r.acct.rows += int64(n)
			return true
		}
	}
}

// Err returns the error that stopped the reader, or nil at a clean end. A
// bad row gives a *RowError (without a budget), a budget exceeded a
// *BudgetError, a missing or unusable column a *ColumnError; Parquet
// decoding errors wrap parquet-go's errors or ErrCorrupt, CSV syntax errors
// a *csv.ParseError.
func (r *Reader) Err() error { return r.err }

// Stats returns the counts so far. The slices are the caller's.
func (r *Reader) Stats() Stats { return r.acct.stats() }

// Progress returns the number of rows read so far (Stats.RowsRead as of the
// last batch). Unlike every other method it is safe to call from another
// goroutine while the reader is in use, for a progress display.
func (r *Reader) Progress() int64 { return r.progress.Load() }

// Close releases the current batch and closes the open source. It does not
// report earlier read errors; use Err.
func (r *Reader) Close() error {
	if !r.shut() {
		return nil
	}
	r.bld.release()
	var errs []error
	for _, a := range r.ahead {
		if a.fr != nil {
			errs = append(errs, a.fr.close())
		}
	}
	r.ahead = nil
	if r.cur != nil {
		errs = append(errs, r.cur.close())
		r.cur = nil
	}
	return errors.Join(errs...)
}

// readAhead opens up to Workers of the next sources while the current one,
// a Parquet file read by the bulk path, is still being read, and starts
// decoding those that are Parquet files too: the workers of all of them
// keep the cores busy across file boundaries, which matters for logs of
// many small files (one row group each is common in partitioned exports).
// It stops at the first source that is not Parquet or cannot be opened;
// that error is kept until the reader reaches it.
func (r *Reader) readAhead() {
	for len(r.ahead) < r.workers && r.next < len(r.sources) && r.sources[r.next].kind == FormatParquet {
		if n := len(r.ahead); n > 0 && r.ahead[n-1].err != nil {
			return
		}
		src := r.sources[r.next]
		r.next++
		fr, err := r.open(src)
		r.ahead = append(r.ahead, openedFile{fr: fr, err: err})
		if pr, ok := fr.(*parquetReader); ok && err == nil && pr.bulk {
			pr.startPipeline(r.workers, r.acct.budget)
		}
	}
}

// open opens a source with the reader's settings.
func (r *Reader) open(src Source) (fileReader, error) {
	fr, err := openFile(src, r.plan)
	if pr, ok := fr.(*parquetReader); ok && err == nil {
		pr.mem, pr.batchSize = r.mem, r.batchSize
	}
	if cr, ok := fr.(*csvReader); ok && err == nil {
		cr.mem, cr.batchSize = r.mem, r.batchSize
	}
	return fr, err
}

func openFile(src Source, p *plan) (fileReader, error) {
	return openAs(src,
		func(o *openedSource) (fileReader, error) { return newCSVReader(src, o, p) },
		func(o *openedSource) (fileReader, error) { return newParquetReader(src, o, p) })
}

// openAs opens src and makes a reader of it with csv or pq, by its format;
// when that fails, it closes the source.
func openAs[R any](src Source, csv, pq func(*openedSource) (R, error)) (R, error) {
	var r R
	o, err := src.open()
	if err != nil {
		return r, err
	}
	switch src.kind {
	case FormatCSV:
		r, err = csv(o)
	case FormatParquet:
		r, err = pq(o)
	default:
		err = fmt.Errorf("%s: unknown file type", src.Name)
	}
	if err != nil {
		o.Close()
		var none R // not r: a nil pointer in an interface is not nil
		return none, err
	}
	return r, nil
}

// accounting counts rows and bad rows and holds the error budget.
type accounting struct {
	files    int
	rowsRead int64
	rows     int64
	filtered filterCount

	badBy    [numReasons]int64
	badTotal int64
	first    [numReasons]*RowError
	last     badRow // the last bad row; value copied into lastVal
	lastVal  []byte

	budget   bool
	maxRows  int64   // 0: no count limit
	maxShare float64 // 0: no share limit
}

// badRow describes a bad row for accounting.bad. value may point into a
// reader's buffers; it is copied.
type badRow struct {
	file       string
	row        int64
	rowGroup   int
	column     string
	value      string
	reason     error
	wantFields int
}

func (b *badRow) rowError() *RowError {
	return &RowError{File: b.file, Row: b.row, RowGroup: b.rowGroup, Column: b.column,
		Value: strings.Clone(b.value), Err: b.reason, wantFields: b.wantFields}
}

// bad counts a bad row. It returns nil when the row is to be skipped, and
// the error that stops the reader otherwise.
func (a *accounting) bad(b badRow) error {
	i := reasonIndex(b.reason)
	if i < 0 {
		// Not a row reason: a programming error upstream; stop.
		return fmt.Errorf("%s:%d: %w", b.file, b.row, b.reason)
	}
	a.badBy[i]++
	a.badTotal++
	if a.first[i] == nil {
		a.first[i] = b.rowError()
	}
	if !a.budget {
		return b.rowError()
	}
	a.lastVal = append(a.lastVal[:0], b.value...)
	a.last = b
	a.last.value = ""
	if a.maxRows > 0 && a.badTotal > a.maxRows {
		return &BudgetError{MaxBadRows: a.maxRows, BadRows: a.badTotal, RowsRead: a.rowsRead, Last: a.lastError()}
	}
	return nil
}

func (a *accounting) lastError() *RowError {
	e := a.last.rowError()
	e.Value = string(a.lastVal)
	return e
}

// filterCount counts the valid rows left out by Options.Events.
type filterCount struct {
	n     int64
	maxTS int64 // the largest ts among them, when n > 0
}

// add counts a row whose ts is ts.
func (f *filterCount) add(ts int64) {
	if f.n == 0 || ts > f.maxTS {
		f.maxTS = ts
	}
	f.n++
}

// merge adds the rows counted in g.
func (f *filterCount) merge(g filterCount) {
	if g.n > 0 && (f.n == 0 || g.maxTS > f.maxTS) {
		f.maxTS = g.maxTS
	}
	f.n += g.n
}

// endCheck applies the share limit once all rows are read.
func (a *accounting) endCheck() error {
	if a.maxShare > 0 && a.badTotal > 0 && float64(a.badTotal) > a.maxShare*float64(a.rowsRead) {
		return &BudgetError{MaxBadShare: a.maxShare, BadRows: a.badTotal, RowsRead: a.rowsRead, Last: a.lastError()}
	}
	return nil
}

func (a *accounting) stats() Stats {
	st := Stats{Files: a.files, RowsRead: a.rowsRead, Rows: a.rows, Filtered: a.filtered.n, FilteredMaxTS: a.filtered.maxTS}
	for i, n := range a.badBy {
		if n == 0 {
			continue
		}
		reason, _ := reasonOf(i)
		st.BadRows = append(st.BadRows, BadRowCount{Reason: reason, Count: n})
		e := *a.first[i]
		st.BadRowExamples = append(st.BadRowExamples, &e)
	}
	return st
}

// Positions of the logical columns in a row. The optional experiment and arm
// columns and the segments follow the three required ones; plan records
// where (or -1).
const (
	colUser  = 0
	colTS    = 1
	colEvent = 2
)

// plan is the column layout shared by the format readers and the batch
// builder.
type plan struct {
	physical  []string // physical column name per logical column
	logical   []string // logical (output) name per logical column
	expCol    int      // position of experiment, or -1
	armCol    int      // position of arm, or -1
	epochUnit int64    // nanoseconds per epoch unit, 0 when unset
	exposure  string
	delimiter rune
	schema    *arrow.Schema
	// planned maps an experiment key to its planned arms (see
	// Options.PlannedArms); nil checks nothing.
	planned *plannedArms
	// events is the set of Options.Events; nil keeps every event.
	events *nameSet
	// dict marks the logical columns that the batches dictionary-encode
	// (Options.DictionaryColumns); nil: none.
	dict []bool
	// rowByRow and csvChunk are Options.rowByRow and csvChunk.
	rowByRow bool
	csvChunk int
}

// dictionaryType is the type of a dictionary-encoded column of the batches.
var dictionaryType = &arrow.DictionaryType{IndexType: arrow.PrimitiveTypes.Int32, ValueType: arrow.BinaryTypes.String}

// keep reports whether a valid row goes into the batches: its event is
// wanted (see Options.Events).
func (p *plan) keep(r *row) bool {
	return p.events == nil || p.events.has(r.cells[colEvent].s)
}

func newPlan(opts Options) (*plan, error) {
	m := opts.Mapping
	for _, c := range []struct{ name, val string }{{"user", m.User}, {"ts", m.TS}, {"event", m.Event}} {
		if c.val == "" {
			return nil, fmt.Errorf("column mapping: no column named for %s", c.name)
		}
	}
	p := &plan{expCol: -1, armCol: -1, exposure: opts.ExposureEvent, delimiter: ',', rowByRow: opts.rowByRow,
		csvChunk: opts.csvChunk}
	if p.csvChunk <= 0 {
		p.csvChunk = defaultCSVChunk
	}
	if len(opts.PlannedArms) > 0 {
		if p.exposure == "" {
			return nil, errors.New("planned arms need the exposure event")
		}
		p.planned = newPlannedArms(opts.PlannedArms)
	}
	if len(opts.Events) > 0 {
		p.events = newNameSet(opts.Events)
	}
	if d := opts.Delimiter; d != 0 {
		if d == '"' || d == '\r' || d == '\n' || d == utf8.RuneError || !utf8.ValidRune(d) {
			return nil, fmt.Errorf("CSV delimiter %q: cannot be a quote, a line end or an invalid rune", d)
		}
		p.delimiter = d
	}
	if m.EpochUnit != "" {
		p.epochUnit = epochUnitNanos(m.EpochUnit)
		if p.epochUnit == 0 {
			return nil, fmt.Errorf("epoch unit %q: want s, ms, us or ns", m.EpochUnit)
		}
	}
	add := func(logical, physical string) {
		p.logical = append(p.logical, logical)
		p.physical = append(p.physical, physical)
	}
	add(experiment.ColUser, m.User)
	add(experiment.ColTS, m.TS)
	add(experiment.ColEvent, m.Event)
	if m.Experiment != "" {
		p.expCol = len(p.logical)
		add(experiment.ColExperiment, m.Experiment)
	}
	if m.Arm != "" {
		p.armCol = len(p.logical)
		add(experiment.ColArm, m.Arm)
	}
	seen := map[string]bool{}
	for _, n := range p.logical {
		seen[n] = true
	}
	for _, s := range m.Segments {
		if s == "" {
			return nil, errors.New("column mapping: empty segment column name")
		}
		if seen[s] {
			return nil, fmt.Errorf("column mapping: segment column %q clashes with another column of the event table", s)
		}
		seen[s] = true
		add(s, s)
	}
	if p.exposure != "" && p.armCol < 0 {
		return nil, fmt.Errorf("column mapping: exposure event %q needs an arm column", p.exposure)
	}

	fields := make([]arrow.Field, len(p.logical))
	for i, n := range p.logical {
		fields[i] = arrow.Field{Name: n, Type: arrow.BinaryTypes.String, Nullable: i > colEvent}
	}
	fields[colTS].Type = &arrow.TimestampType{Unit: arrow.Nanosecond, TimeZone: "UTC"}
	if opts.DictionaryColumns {
		p.dict = make([]bool, len(p.logical))
		for _, i := range []int{colEvent, p.expCol, p.armCol} {
			if i >= 0 {
				p.dict[i] = true
				fields[i].Type = dictionaryType
			}
		}
	}
	p.schema = arrow.NewSchema(fields, nil)
	return p, nil
}

// cell is one decoded value. s may point into a reader's buffers (a CSV
// record, a Parquet page); it is valid until the row has been appended.
type cell struct {
	s    string
	null bool
	// code is s's code in its column's interner plus one, 0 when it has
	// none: the Parquet bulk path sets it on the values of dictionary
	// pages of a dictionary-encoded column (see plan.dict), and the batch
	// builder then finds the value's place in the batch's dictionary
	// without reading s.
	code int32
}

// row is one decoded row, filled by a format reader and then checked by
// plan.check before it reaches the builder.
type row struct {
	cells []cell // per logical column; cells[colTS] holds the raw text of ts
	ts    int64  // ts in nanoseconds, when tsErr is nil
	tsErr error  // nil, ErrNullTimestamp, ErrBadTimestamp or ErrTimestampRange
}

// check decides whether a decoded row is valid. It is the one place that
// decides a row's reason: it returns the logical column at fault and the
// reason (one of the Err* row sentinels), or -1 and nil for a valid row.
func (p *plan) check(r *row) (col int, reason error) {
	if c := r.cells[colUser]; c.null || c.s == "" {
		return colUser, ErrNullUser
	}
	if r.tsErr != nil {
		return colTS, r.tsErr
	}
	ev := r.cells[colEvent]
	if ev.null || ev.s == "" {
		return colEvent, ErrNullEvent
	}
	if p.exposure != "" && ev.s == p.exposure {
		a := r.cells[p.armCol]
		if a.null || a.s == "" {
			return p.armCol, ErrNoArm
		}
		if p.planned != nil {
			key := ""
			if p.expCol >= 0 && !r.cells[p.expCol].null {
				key = r.cells[p.expCol].s
			}
			if arms := p.planned.of(key); arms != nil && !arms.has(a.s) {
				return p.armCol, ErrUnknownArm
			}
		}
	}
	return -1, nil
}

// badSite is a format reader, which knows where its current row is.
type badSite interface {
	// badAt describes the current row, which plan.check rejected for
	// reason in logical column col.
	badAt(r *row, col int, reason error) badRow
}

// take applies the row rules to a decoded row: a bad row (plan.check) goes
// to a.bad, described by site; a valid row of an unwanted event
// (plan.keep) is counted; any other is appended to b. It returns the error
// that stops the reader.
func (p *plan) take(r *row, b *batchBuilder, a *accounting, site badSite) error {
	if col, reason := p.check(r); reason != nil {
		return a.bad(site.badAt(r, col, reason))
	}
	if !p.keep(r) {
		a.filtered.add(r.ts)
		return nil
	}
	b.append(r)
	return nil
}

// badRow describes a row that plan.check rejected; the value may point into
// the reader's buffers.
func (p *plan) badRow(file string, pos int64, rowGroup int, r *row, col int, reason error) badRow {
	return badRow{file: file, row: pos, rowGroup: rowGroup, column: p.physical[col], value: r.cells[col].s, reason: reason}
}

// parseTSText parses a timestamp written as text with the epoch unit of
// the mapping (see parseTSText).
func (p *plan) parseTSText(s string) (int64, error) { return parseTSText(s, p.epochUnit) }

// partitionCols holds the logical columns that a source supplies from its
// partitions rather than from the file (see Mapping).
type partitionCols struct {
	from  []bool // per logical column: taken from a partition
	cells []cell // the partition's value, where from is true
	ts    int64  // the ts value when from[colTS]
	tsErr error
}

// set makes logical column i a constant from the source's
// partition of that name, or reports that it has none.
func (pc *partitionCols) set(p *plan, src Source, i int) bool {
	v, ok := src.partition(p.physical[i])
	if !ok {
		return false
	}
	if pc.from == nil {
		pc.from = make([]bool, len(p.physical))
		pc.cells = make([]cell, len(p.physical))
	}
	pc.from[i] = true
	pc.cells[i] = cell{s: v}
	if i == colTS {
		pc.ts, pc.tsErr = p.parseTSText(v)
	}
	return true
}

// fill sets the partition columns of a row.
func (pc *partitionCols) fill(r *row) {
	if pc.from == nil {
		return
	}
	for i, f := range pc.from {
		if f {
			r.cells[i] = pc.cells[i]
		}
	}
	if pc.from[colTS] {
		r.ts, r.tsErr = pc.ts, pc.tsErr
	}
}

// MergeStats returns the counts of two reads of different sources
// together (a resumed run's saved counts and its new files'): every count
// summed, the larger FilteredMaxTS, bad rows by reason in the order of
// the reasons, and the first example of each reason from a when it has
// one, else from b.
func MergeStats(a, b Stats) Stats {
	out := Stats{Files: a.Files + b.Files, RowsRead: a.RowsRead + b.RowsRead, Rows: a.Rows + b.Rows,
		Filtered: a.Filtered + b.Filtered}
	var fc filterCount
	fc.merge(filterCount{n: a.Filtered, maxTS: a.FilteredMaxTS})
	fc.merge(filterCount{n: b.Filtered, maxTS: b.FilteredMaxTS})
	out.FilteredMaxTS = fc.maxTS
	for i := 0; i < numReasons; i++ {
		reason, _ := reasonOf(i)
		var n int64
		var ex *RowError
		for _, s := range []Stats{b, a} {
			for j, c := range s.BadRows {
				if c.Reason == reason {
					n += c.Count
					if j < len(s.BadRowExamples) {
						ex = s.BadRowExamples[j]
					}
				}
			}
		}
		if n > 0 {
			out.BadRows = append(out.BadRows, BadRowCount{Reason: reason, Count: n})
			out.BadRowExamples = append(out.BadRowExamples, ex)
		}
	}
	return out
}
