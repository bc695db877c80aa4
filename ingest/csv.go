package ingest

import (
	"fmt"
	"io"
	"slices"
	"strconv"

	"github.com/apache/arrow-go/v18/arrow/memory"
)

// csvReader reads the events of one CSV source, opened by openCSV. The
// first record is the header; columns are found by header name. Every cell
// is text: user, event, experiment, arm and segments are taken as they are
// (no trimming; an integer user id stays the digits written), and ts is
// parsed by plan.parseTSText.
type csvReader struct {
	file  string
	f     *CSVFile // the sequential path; nil on the parallel one
	p     *plan
	field []int // header position of each logical column, -1 for a partition column
	nhead int   // fields in the header
	part  partitionCols
	row   row

	// The parallel path (csvpar.go): chunks from split, the first from
	// the header's end, parsed by the workers of pl; or, for a file that
	// is not compressed, the blocks after the header, which the workers
	// read themselves (csvblocks.go).
	src       *openedSource
	gz        io.Closer
	split     *csvSplitter
	first     csvChunk
	blocks    *csvBlocks
	pl        *csvPipeline
	plDone    bool
	mem       memory.Allocator
	batchSize int
}

func newCSVReader(src Source, o *openedSource, p *plan) (*csvReader, error) {
	c := &csvReader{file: src.Name, p: p}
	var header []string
	if p.rowByRow {
		f, err := openCSV(src.Name, o, p.delimiter)
		if err != nil {
			return nil, err
		}
		c.f, header = f, f.Header()
	} else {
		var err error
		if header, err = c.openChunks(o); err != nil {
			return nil, err
		}
	}
	c.nhead = len(header)
	c.field = make([]int, len(p.physical))
	for i, name := range p.physical {
		var err error
		if c.field[i], err = headerColumn(src.Name, header, name); err != nil {
			return nil, err
		}
		if c.field[i] < 0 && !c.part.set(p, src, i) {
			return nil, missingColumn(src.Name, name, header, src.partitionKeys())
		}
	}
	c.row.cells = make([]cell, len(p.physical))
	return c, nil
}

// openChunks reads the header and sets up the chunks of the rest: cut by
// split from the decompressed stream of a gzip file, by offset into the
// blocks of any other (the header is read through split, in small chunks).
func (c *csvReader) openChunks(o *openedSource) ([]string, error) {
	br, gz, err := openCSVStream(c.file, o)
	if err != nil {
		return nil, err
	}
	c.src = o
	size := c.p.csvChunk
	if gz != nil {
		c.gz = gz
	} else {
		size = min(size, csvHeaderChunk)
	}
	c.split = &csvSplitter{in: br, size: size, line: 1}
	var recs *csvRecords
	var header []string
	var before int64 // bytes of the chunks before the header's
	for err = io.EOF; err == io.EOF; {
		// Chunks of empty lines come before the header's.
		if recs != nil {
			before += int64(len(recs.data))
		}
		ch, ok := c.split.next()
		if !ok {
			return nil, fmt.Errorf("%s: empty file: want a header row", c.file)
		}
		recs = newCSVRecords(c.file, ch, c.p.delimiter)
		header, err = recs.next()
	}
	if err != nil {
		return nil, err
	}
	header = slices.Clone(header)
	c.first = csvChunk{data: recs.data[recs.pos:], line: recs.line, err: recs.err}
	if gz == nil && recs.err == nil {
		var bom int64
		var head [3]byte // utf8BOM
		if n, _ := o.r.ReadAt(head[:], 0); n == len(head) && string(head[:]) == string(utf8BOM) {
			bom = int64(len(utf8BOM))
		}
		c.blocks = &csvBlocks{r: o.r, start: bom + before + int64(recs.pos), size: o.size, line: recs.line, block: int64(c.p.csvChunk)}
		c.split, c.first = nil, csvChunk{}
	}
	return header, nil
}

// csvHeaderChunk is the chunk size in which the header of a file that is
// not compressed is read.
const csvHeaderChunk = 64 << 10

// fill sets the cells of r from a record of the header's length.
func (c *csvReader) fill(r *row, rec []string) {
	c.part.fill(r)
	for i, j := range c.field {
		if j >= 0 {
			r.cells[i] = cell{s: rec[j]}
		}
	}
	if j := c.field[colTS]; j >= 0 {
		r.ts, r.tsErr = c.p.parseTSText(rec[j])
	}
}

func (c *csvReader) read(b *batchBuilder, limit int, a *accounting) (int, error) {
	n0 := b.n
	r := &c.row
	for b.n-n0 < limit {
		rec, err := c.f.Read()
		if err != nil {
			return b.n - n0, err
		}
		a.rowsRead++
		if len(rec) != c.nhead {
			if err := a.bad(badRow{file: c.file, row: int64(c.f.Line(0)), rowGroup: -1, reason: ErrFieldCount,
				value: strconv.Itoa(len(rec)), wantFields: c.nhead}); err != nil {
				return b.n - n0, err
			}
			continue
		}
		c.fill(r, rec)
		if err := c.p.take(r, b, a, c); err != nil || b.full() {
			return b.n - n0, err
		}
	}
	return b.n - n0, nil
}

// badAt describes a bad row: its line is where the field at fault starts.
func (c *csvReader) badAt(r *row, col int, reason error) badRow {
	return c.p.badRow(c.file, int64(c.f.Line(max(c.field[col], 0))), -1, r, col, reason)
}

func (c *csvReader) close() error {
	if c.f != nil {
		return c.f.Close()
	}
	c.stop()
	if c.gz != nil {
		c.gz.Close() // it holds nothing of the source's
	}
	return c.src.Close()
}
