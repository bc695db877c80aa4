package ingest

import (
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"slices"
	"strconv"
	"strings"
	"unsafe"

	"github.com/apache/arrow-go/v18/arrow/memory"
	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/deprecated"
	"github.com/parquet-go/parquet-go/format"
)

// parquetReader reads one Parquet source with parquet-go: only the mapped
// columns, row group by row group, page by page, keeping one page per column
// in memory. Columns are read in step, one value of each per row.
//
// Mapped columns must be non-repeated leaves: top-level columns, or fields
// of (non-repeated) groups named by a dotted path such as "device.os". Text columns (user,
// event, experiment, arm, segments) may be BYTE_ARRAY (any annotation),
// INT32 or INT64 (written in decimal) or BOOLEAN ("true", "false"). The ts
// column may be INT64 TIMESTAMP (milli, micro, nano; not UTC-adjusted is
// taken as UTC), INT96 (Impala and Spark), INT32 DATE (midnight UTC), a plain
// INT32 or INT64 with Mapping.EpochUnit, or BYTE_ARRAY text for
// ParseTimestamp.
type parquetReader struct {
	file string
	src  *openedSource
	pf   *parquet.File
	p    *plan
	cols []*pqColumn // per logical column; nil for a partition column
	part partitionCols

	rowGroups []parquet.RowGroup
	rg        int   // current row group, or -1 before the first
	rgRows    int64 // rows in the current row group
	rgDone    int64 // rows of the current row group already read
	rowBase   int64 // rows of the file before the current row group
	row       row

	// The bulk path (pqbulk.go), when bulk.
	bulk      bool
	mem       memory.Allocator
	batchSize int
	rgStart   []int64 // rows before each row group
	pl        *pipeline
	plDone    bool
}

// valueKind says how a column's values become text or time.
type valueKind int

const (
	kindBytes     valueKind = iota + 1 // BYTE_ARRAY as text
	kindInt32                          // INT32 in decimal
	kindUint32                         // INT32 annotated unsigned
	kindInt64                          // INT64 in decimal
	kindUint64                         // INT64 annotated unsigned
	kindBool                           // BOOLEAN as true/false
	kindTSText                         // BYTE_ARRAY parsed by ParseTimestamp
	kindTSEpoch64                      // INT64 count of unit nanoseconds
	kindTSEpoch32                      // INT32 count of unit nanoseconds
	kindTSDate                         // INT32 days
	kindTSInt96                        // INT96 Julian day + nanoseconds
)

// pqColumn is the reading state of one mapped column in the current row group.
type pqColumn struct {
	name    string   // physical
	index   int      // leaf column index in the file
	path    []string // path in the schema
	typ     parquet.Type
	kind    valueKind // a text column's kind
	ts      tsDecoder // the ts column's decoder
	maxDef  byte      // the column's maximum definition level
	scratch []byte

	pages parquet.Pages
	page  parquet.Page
	vr    parquet.ValueReader
	buf   []parquet.Value
	pos   int
	n     int
}

// errColumnShort marks a column chunk with fewer values than its row group
// has rows.
var errColumnShort = errors.New("fewer values than rows")

// errPanicked marks an error made from a panic in parquet-go.
var errPanicked = errors.New("parquet-go panicked")

func newParquetReader(source Source, src *openedSource, p *plan) (pr *parquetReader, err error) {
	file := source.Name
	pf, err := openParquet(src.r, src.size)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", file, err)
	}
	r := &parquetReader{file: file, src: src, pf: pf, p: p, rg: -1, rowGroups: pf.RowGroups()}
	schema := pf.Schema()
	var top []string
	for _, f := range schema.Fields() {
		top = append(top, f.Name())
	}
	for i, name := range p.physical {
		leaf, ok := lookupLeaf(schema, name)
		if !ok {
			if slices.Contains(top, name) {
				return nil, &ColumnError{File: file, Column: name, Err: ErrColumnType,
					Detail: "a group: name one of its fields as " + name + ".field"}
			}
			if r.part.set(p, source, i) {
				r.cols = append(r.cols, nil)
				continue
			}
			return nil, missingColumn(file, name, top, source.partitionKeys())
		}
		if leaf.MaxRepetitionLevel > 0 {
			return nil, &ColumnError{File: file, Column: name, Err: ErrColumnType, Detail: "a repeated column"}
		}
		c := &pqColumn{name: name, index: leaf.ColumnIndex, maxDef: byte(leaf.MaxDefinitionLevel),
			path: schema.Columns()[leaf.ColumnIndex], typ: leaf.Node.Type(), buf: make([]parquet.Value, 1024)}
		var detail string
		if i == colTS {
			c.ts, detail = newTSDecoder(c.typ, p.epochUnit)
		} else {
			c.kind, detail = textKind(c.typ)
		}
		if detail != "" {
			return nil, &ColumnError{File: file, Column: name, Err: ErrColumnType, Detail: detail}
		}
		r.cols = append(r.cols, c)
	}
	r.row.cells = make([]cell, len(p.physical))
	if err := r.transcodeLZ4(); err != nil {
		return nil, err
	}
	r.bulk = r.bulkable() && !p.rowByRow
	var rows int64
	for _, g := range r.rowGroups {
		r.rgStart = append(r.rgStart, rows)
		rows += g.NumRows()
	}
	return r, nil
}

// transcodeLZ4 rewrites the mapped column chunks compressed with the
// deprecated LZ4 codec, which parquet-go cannot decode, as uncompressed
// ones (see transcodeLZ4 in lz4hadoop.go) and reopens the rewritten file.
// A file without such chunks is left as it is.
func (r *parquetReader) transcodeLZ4() error {
	cols := map[int]string{}
	for _, c := range r.cols {
		if c != nil {
			cols[c.index] = c.name
		}
	}
	md := r.pf.Metadata()
	if !hasLZ4(md, cols) {
		return nil
	}
	t, err := transcodeLZ4(r.src.r, r.src.size, md, cols)
	if err != nil {
		return fmt.Errorf("%s: %w", r.file, err)
	}
	pf, err := openParquet(t, t.size)
	if err != nil {
		return fmt.Errorf("%s: reopening the file with its LZ4 column chunks rewritten: %w", r.file, err)
	}
	r.pf, r.rowGroups = pf, pf.RowGroups()
	r.src = &openedSource{r: t, size: t.size, c: r.src.c}
	return nil
}

// openParquet opens a Parquet file with parquet-go, reading only its
// footer.
func openParquet(ra io.ReaderAt, size int64) (pf *parquet.File, err error) {
	defer func() {
		// Last-resort guard: parquet-go may panic on a corrupt footer.
		// Turn that into an error.
		if v := recover(); v != nil {
			pf, err = nil, fmt.Errorf("corrupt parquet file: %w reading the footer: %v", errPanicked, v)
		}
	}()
	return parquet.OpenFile(ra, size, parquet.SkipPageIndex(true), parquet.SkipBloomFilters(true))
}

// checkParquetBytes checks the two ends of a file named as Parquet before
// parquet-go reads it. A Parquet file is "PAR1", the column chunks, the
// footer, the footer's length (4 bytes, little-endian) and "PAR1" again
// ("PARE" at both ends when the footer is encrypted), so it has at least 12
// bytes. The errors, by what the bytes show:
//
//   - no Parquet magic at the start: not a Parquet file (ErrFormat), saying
//     whether it holds gzip data or text such as CSV; with the magic at
//     the end only, a corrupt start (ErrCorrupt);
//   - the magic at the start, but fewer than 12 bytes, or no magic at the
//     end: a truncated file (ErrCorrupt);
//   - a footer length that points outside the file (ErrCorrupt):
//     parquet-go v0.32.0 allocates whatever length is written there, so a
//     corrupt length of up to 4 GiB would be allocated for a file of a few
//     bytes.
func checkParquetBytes(r io.ReaderAt, size int64) error {
	var head, tail [8]byte
	n, err := r.ReadAt(head[:min(size, 4)], 0)
	if err != nil && n < int(min(size, 4)) {
		return fmt.Errorf("reading the first bytes: %w", err)
	}
	if size >= 8 {
		if _, err := r.ReadAt(tail[:], size-8); err != nil {
			return fmt.Errorf("reading the footer: %w", err)
		}
	}
	start := string(head[:4])
	if !parquetMagic(start) {
		if size >= 12 && parquetMagic(string(tail[4:])) {
			return &contentError{ErrCorrupt, fmt.Sprintf("corrupt parquet file: it ends like a Parquet file but starts with %q, not PAR1", start)}
		}
		if size < 4 && size > 0 && strings.HasPrefix("PAR1", string(head[:size])) {
			return truncated(size, "too short to hold a footer")
		}
		return &contentError{ErrFormat, "not a Parquet file: " + describeContent(r, size)}
	}
	if size < 12 {
		return truncated(size, "too short to hold a footer")
	}
	if !parquetMagic(string(tail[4:])) {
		return truncated(size, "no footer: the last 4 bytes are not PAR1")
	}
	// The file starts with 4 bytes of magic and ends with 8.
	if n := int64(binary.LittleEndian.Uint32(tail[:4])); n > size-12 {
		return fmt.Errorf("%w: the footer claims %d bytes, the file has %d (truncated, or a corrupt footer length)", ErrCorrupt, n, size)
	}
	return nil
}

func parquetMagic(s string) bool { return s == "PAR1" || s == "PARE" }

// truncated is the error of a Parquet file cut short; it is ErrCorrupt.
func truncated(size int64, detail string) error {
	return &contentError{ErrCorrupt, fmt.Sprintf("truncated Parquet file (%s; %s)", plural(size, "byte"), detail)}
}

// plural returns "1 byte" or "n bytes".
func plural(n int64, unit string) string {
	if n == 1 {
		return "1 " + unit
	}
	return strconv.FormatInt(n, 10) + " " + unit + "s"
}

// lookupLeaf finds the leaf column called name: a top-level column, or a
// field inside groups written as a dotted path ("a.b").
func lookupLeaf(schema *parquet.Schema, name string) (parquet.LeafColumn, bool) {
	if leaf, ok := schema.Lookup(name); ok && leaf.Node.Leaf() {
		return leaf, true
	}
	if strings.Contains(name, ".") {
		if leaf, ok := schema.Lookup(strings.Split(name, ".")...); ok && leaf.Node.Leaf() {
			return leaf, true
		}
	}
	return parquet.LeafColumn{}, false
}

// textKind decides how to read a text column (user, event, experiment,
// arm, a segment) of type t. For a column it cannot read it returns a
// non-empty detail for the error.
func textKind(t parquet.Type) (valueKind, string) {
	lt, ct, physical := typeNames(t)
	switch t.Kind() {
	case parquet.ByteArray:
		switch lt.(type) {
		case nil, *format.StringType, *format.EnumType, *format.JsonType:
			return kindBytes, ""
		}
	case parquet.Int32, parquet.Int64:
		unsigned := false
		switch l := lt.(type) {
		case nil:
			if ct != nil && *ct != deprecated.Int32 && *ct != deprecated.Int64 &&
				*ct != deprecated.Uint32 && *ct != deprecated.Uint64 &&
				*ct != deprecated.Int8 && *ct != deprecated.Int16 &&
				*ct != deprecated.Uint8 && *ct != deprecated.Uint16 {
				return 0, "cannot read " + physical + " as text"
			}
			unsigned = ct != nil && (*ct == deprecated.Uint32 || *ct == deprecated.Uint64 ||
				*ct == deprecated.Uint8 || *ct == deprecated.Uint16)
		case *format.IntType:
			unsigned = !l.IsSigned
		default:
			return 0, "cannot read " + physical + " as text"
		}
		switch {
		case t.Kind() == parquet.Int32 && unsigned:
			return kindUint32, ""
		case t.Kind() == parquet.Int32:
			return kindInt32, ""
		case unsigned:
			return kindUint64, ""
		default:
			return kindInt64, ""
		}
	case parquet.Boolean:
		return kindBool, ""
	}
	return 0, "cannot read " + physical + " as text"
}

func (r *parquetReader) read(b *batchBuilder, limit int, a *accounting) (n int, err error) {
	defer func() {
		// Last-resort guard: parquet-go may panic while decoding the pages
		// of a corrupt row group. Turn that into an error naming the file
		// and row group; the reader stops there.
		if v := recover(); v != nil {
			err = fmt.Errorf("%s: row group %d: corrupt parquet data: %w: %v", r.file, r.rg, errPanicked, v)
		}
	}()
	n0 := b.n
	row := &r.row
	for b.n-n0 < limit {
		if r.rg < 0 || r.rgDone == r.rgRows {
			if err := r.nextRowGroup(); err != nil {
				return b.n - n0, err
			}
			continue
		}
		r.part.fill(row)
		for i, c := range r.cols {
			if c == nil {
				continue
			}
			v, err := c.next()
			if err != nil {
				return b.n - n0, chunkError(r.file, r.rg, c.name, r.rgRows, err)
			}
			if i == colTS {
				row.ts, row.cells[i], row.tsErr = c.ts.decode(v)
				continue
			}
			row.cells[i] = c.text(v)
		}
		r.rgDone++
		a.rowsRead++
		if err := r.p.take(row, b, a, r); err != nil || b.full() {
			return b.n - n0, err
		}
	}
	return b.n - n0, nil
}

// badAt describes a bad row: the current row of the file.
func (r *parquetReader) badAt(row *row, col int, reason error) badRow {
	return r.p.badRow(r.file, r.rowBase+r.rgDone, r.rg, row, col, reason)
}

// nextRowGroup finishes the current row group and opens the pages of the
// next one, or returns io.EOF after the last.
func (r *parquetReader) nextRowGroup() error {
	if r.rg >= 0 {
		for _, c := range r.cols {
			if c == nil {
				continue
			}
			// A column with values beyond the row group's rows is corrupt.
			if _, err := c.next(); err != errColumnShort {
				if err == nil {
					err = fmt.Errorf("%w: more values than the %d rows of the row group", ErrCorrupt, r.rgRows)
				}
				return fmt.Errorf("%s: row group %d: column %q: %w", r.file, r.rg, c.name, err)
			}
			c.closePages()
		}
		r.rowBase += r.rgRows
	}
	r.rg++
	if r.rg >= len(r.rowGroups) {
		return io.EOF
	}
	g := r.rowGroups[r.rg]
	r.rgRows, r.rgDone = g.NumRows(), 0
	if r.rgRows < 0 {
		return fmt.Errorf("%s: row group %d: %w: %d rows", r.file, r.rg, ErrCorrupt, r.rgRows)
	}
	chunks := g.ColumnChunks()
	for _, c := range r.cols {
		if c == nil {
			continue
		}
		if c.index < 0 || c.index >= len(chunks) {
			return fmt.Errorf("%s: row group %d: column %q: %w: no column chunk", r.file, r.rg, c.name, ErrCorrupt)
		}
		if err := r.checkChunk(c, r.rg, r.rgRows); err != nil {
			return fmt.Errorf("%s: row group %d: column %q: %w", r.file, r.rg, c.name, err)
		}
		c.pages = chunks[c.index].Pages()
		c.pos, c.n = 0, 0
	}
	return nil
}

// checkChunk compares what the file's metadata says about the column chunk
// of c in the current row group with the schema and the row group: the
// chunk must be of the same column and physical type, be compressed with a
// codec parquet-go has (not LZO; the deprecated LZ4 was rewritten by
// transcodeLZ4) and with the codec of the column's chunk in row group 0
// (parquet-go decodes all of a column's chunks with that one), lie inside
// the file, have page headers whose claims are possible (checkPages), and,
// the column being non-repeated, hold one value (or null) per row. The
// pages are checked against the chunk as they are read (one value per
// row, no more, no fewer).
func (r *parquetReader) checkChunk(c *pqColumn, rg int, rgRows int64) error {
	groups := r.pf.Metadata().RowGroups
	if rg >= len(groups) || c.index >= len(groups[rg].Columns) {
		return fmt.Errorf("%w: no column chunk metadata", ErrCorrupt)
	}
	cc := &groups[rg].Columns[c.index]
	md := &cc.MetaData
	if !slices.Equal(md.PathInSchema, c.path) {
		return fmt.Errorf("%w: the column chunk's metadata names column %q, the schema %q",
			ErrCorrupt, strings.Join(md.PathInSchema, "."), strings.Join(c.path, "."))
	}
	if want := c.typ.Kind(); int32(md.Type) != int32(want) {
		return fmt.Errorf("%w: the column chunk's metadata gives type %v, the schema %v", ErrCorrupt, md.Type, want)
	}
	if md.NumValues != rgRows {
		return fmt.Errorf("%w: the column chunk claims %d values, the row group %d rows (a non-repeated column has one per row)",
			ErrCorrupt, md.NumValues, rgRows)
	}
	if codec := parquet.LookupCompressionCodec(md.Codec); codec.String() == "UNSUPPORTED" {
		return fmt.Errorf("%w: compressed with %v, a codec parquet-go cannot decode (rewrite the file with SNAPPY, ZSTD, GZIP or LZ4_RAW)",
			ErrCodec, md.Codec)
	}
	if first := groups[0].Columns; c.index < len(first) && first[c.index].MetaData.Codec != md.Codec {
		return fmt.Errorf("%w: compressed with %v, the column's chunk in row group 0 with %v: parquet-go decodes all chunks of a column with the codec of the first (rewrite the file with one codec)",
			ErrCodec, md.Codec, first[c.index].MetaData.Codec)
	}
	start := chunkStart(md)
	if start < 4 || md.TotalCompressedSize < 0 || start > r.src.size-md.TotalCompressedSize {
		return fmt.Errorf("%w: the column chunk's bytes (offset %d, %d bytes) lie outside the file of %d bytes",
			ErrCorrupt, start, md.TotalCompressedSize, r.src.size)
	}
	return checkPages(r.src.r, start, md.TotalCompressedSize, md.Codec, md.NumValues)
}

func (r *parquetReader) close() error {
	r.stopPipeline()
	for _, c := range r.cols {
		if c != nil {
			c.closePages()
		}
	}
	return r.src.Close()
}

// next returns the column's next value, reading pages as needed. It returns
// errColumnShort at the end of the column chunk.
func (c *pqColumn) next() (parquet.Value, error) {
	for c.pos >= c.n {
		if c.vr == nil {
			if c.pages == nil {
				return parquet.Value{}, errColumnShort
			}
			page, err := c.pages.ReadPage()
			if err == io.EOF {
				return parquet.Value{}, errColumnShort
			}
			if err != nil {
				return parquet.Value{}, err
			}
			c.page, c.vr = page, page.Values()
		}
		n, err := c.vr.ReadValues(c.buf)
		if n < 0 || n > len(c.buf) {
			return parquet.Value{}, fmt.Errorf("corrupt page: %d values", n)
		}
		c.pos, c.n = 0, n
		if err != nil && err != io.EOF {
			return parquet.Value{}, err
		}
		if n == 0 || err == io.EOF {
			if n > 0 {
				// Keep the page until its last values are used; the
				// next read returns (0, io.EOF) and releases it.
				break
			}
			c.releasePage()
		}
	}
	v := c.buf[c.pos]
	c.pos++
	return v, nil
}

func (c *pqColumn) releasePage() {
	if c.page != nil {
		parquet.Release(c.page)
	}
	c.page, c.vr = nil, nil
}

func (c *pqColumn) closePages() {
	c.releasePage()
	if c.pages != nil {
		c.pages.Close()
		c.pages = nil
	}
	c.pos, c.n = 0, 0
}

// text converts a value of a text column. The string may point into the
// current page or c.scratch; it is valid until the column's next value.
func (c *pqColumn) text(v parquet.Value) cell {
	if v.IsNull() {
		return cell{null: true}
	}
	switch c.kind {
	case kindBytes:
		b := v.ByteArray()
		return cell{s: unsafe.String(unsafe.SliceData(b), len(b))}
	case kindInt32:
		c.scratch = strconv.AppendInt(c.scratch[:0], int64(v.Int32()), 10)
	case kindUint32:
		c.scratch = strconv.AppendUint(c.scratch[:0], uint64(uint32(v.Int32())), 10)
	case kindInt64:
		c.scratch = strconv.AppendInt(c.scratch[:0], v.Int64(), 10)
	case kindUint64:
		c.scratch = strconv.AppendUint(c.scratch[:0], uint64(v.Int64()), 10)
	case kindBool:
		c.scratch = strconv.AppendBool(c.scratch[:0], v.Boolean())
	}
	return cell{s: unsafe.String(unsafe.SliceData(c.scratch), len(c.scratch))}
}

// MetadataRows returns the rows that the footers of srcs list, and true,
// when every source is a Parquet file whose footer reads; otherwise false
// (a CSV source, a file that does not open: the Reader reports those). It
// reads each footer once more than a Reader does, to size memory ahead of
// a run (see experiment.Tallier.SetReadShare).
func MetadataRows(srcs []Source) (int64, bool) {
	var total int64
	for _, src := range srcs {
		if src.kind != FormatParquet {
			return 0, false
		}
		n, ok := footerRows(src)
		if !ok {
			return 0, false
		}
		total += n
	}
	return total, len(srcs) > 0
}

// footerRows returns the rows that the footer of a Parquet source lists.
func footerRows(src Source) (int64, bool) {
	o, err := src.open()
	if err != nil {
		return 0, false
	}
	defer o.Close()
	pf, err := openParquet(o.r, o.size)
	if err != nil || pf.NumRows() < 0 {
		return 0, false
	}
	return pf.NumRows(), true
}
