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
	// the header's end, parsed by the workers of pl.
	src       *openedSource
	gz        io.Closer
	split     *csvSplitter
	first     csvChunk
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

// openChunks starts cutting the file into chunks and reads the header from
// the first.
func (c *csvReader) openChunks(o *openedSource) ([]string, error) {
	br, gz, err := openCSVStream(c.file, o)
	if err != nil {
		return nil, err
	}
	c.src = o
	if gz != nil {
		c.gz = gz
	}
	c.split = &csvSplitter{in: br, size: c.p.csvChunk, line: 1}
	var recs *csvRecords
	var header []string
	for err = io.EOF; err == io.EOF; {
		// Chunks of empty lines come before the header's.
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
	return header, nil
}

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
