package ingest

import (
	"bufio"
	"compress/gzip"
	"encoding/csv"
	"fmt"
	"io"
	"strconv"
)

// csvReader reads one CSV source with encoding/csv. The first record is the
// header; columns are found by header name. Fields are separated by
// Options.Delimiter, may be quoted (a quoted field may hold the delimiter,
// doubled quotes and line ends), and lines may end in LF or CRLF; a leading
// UTF-8 byte-order mark is dropped. A .csv.gz source is decompressed on the
// fly (concatenated gzip members are read one after another). Every cell is
// text: user, event, experiment, arm and segments are taken as they are (no
// trimming; an integer user id stays the digits written), and ts is parsed
// by plan.parseTSText.
type csvReader struct {
	file  string
	src   *openedSource
	gz    *gzip.Reader // nil unless the source is gzip-compressed
	cr    *csv.Reader
	p     *plan
	field []int // header position of each logical column, -1 for a partition column
	nhead int   // fields in the header
	part  partitionCols
	row   row
}

var utf8BOM = []byte{0xEF, 0xBB, 0xBF}

func newCSVReader(src Source, o *openedSource, p *plan) (*csvReader, error) {
	file := src.Name
	var in io.Reader = io.NewSectionReader(o.r, 0, o.size)
	c := &csvReader{file: file, src: o, p: p}
	if src.gzipped {
		gz, err := gzip.NewReader(in)
		if err != nil {
			return nil, fmt.Errorf("%s: gzip: %w", file, err)
		}
		c.gz = gz
		in = gz
	}
	br := bufio.NewReaderSize(in, 64<<10)
	if b, err := br.Peek(len(utf8BOM)); err == nil && string(b) == string(utf8BOM) {
		br.Discard(len(utf8BOM))
	}
	cr := csv.NewReader(br)
	cr.Comma = p.delimiter
	cr.FieldsPerRecord = -1 // checked here, to report a *RowError
	header, err := cr.Read()
	if err == io.EOF {
		return nil, fmt.Errorf("%s: empty file: want a header row", file)
	}
	if err != nil {
		return nil, fmt.Errorf("%s: %w", file, err)
	}
	cr.ReuseRecord = true // after the header, which is kept
	c.cr, c.nhead = cr, len(header)

	c.field = make([]int, len(p.physical))
	for i, name := range p.physical {
		c.field[i] = -1
		for j, h := range header {
			if h != name {
				continue
			}
			if c.field[i] >= 0 {
				return nil, &ColumnError{File: file, Column: name, Err: ErrColumnType,
					Detail: "the header names it more than once"}
			}
			c.field[i] = j
		}
		if c.field[i] < 0 && !c.part.set(p, src, i) {
			return nil, missingColumn(file, name, header, src.partitionKeys())
		}
	}
	c.row.cells = make([]cell, len(p.physical))
	return c, nil
}

func (c *csvReader) read(b *batchBuilder, limit int, a *accounting) (int, error) {
	n := 0
	r := &c.row
	for n < limit {
		rec, err := c.cr.Read()
		if err == io.EOF {
			return n, io.EOF
		}
		if err != nil {
			// A *csv.ParseError (bare or unclosed quote) names the
			// line and column; keep it whole for errors.As. A gzip
			// error (corrupt data, bad checksum) names no line.
			return n, fmt.Errorf("%s: %w", c.file, err)
		}
		a.rowsRead++
		if len(rec) != c.nhead {
			line, _ := c.cr.FieldPos(0)
			if err := a.bad(badRow{file: c.file, row: int64(line), rowGroup: -1, reason: ErrFieldCount,
				value: strconv.Itoa(len(rec)), wantFields: c.nhead}); err != nil {
				return n, err
			}
			continue
		}
		c.part.fill(r)
		for i, j := range c.field {
			if j >= 0 {
				r.cells[i] = cell{s: rec[j]}
			}
		}
		if j := c.field[colTS]; j >= 0 {
			r.ts, r.tsErr = c.p.parseTSText(rec[j])
		}
		if col, reason := c.p.check(r); reason != nil {
			line, _ := c.cr.FieldPos(max(c.field[col], 0))
			if err := a.bad(c.p.badRow(c.file, int64(line), -1, r, col, reason)); err != nil {
				return n, err
			}
			continue
		}
		if !c.p.keep(r) {
			a.filter(r.ts)
			continue
		}
		b.append(r)
		n++
		if b.full() {
			break
		}
	}
	return n, nil
}

func (c *csvReader) close() error {
	if c.gz != nil {
		c.gz.Close()
	}
	return c.src.Close()
}
