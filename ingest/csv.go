package ingest

import (
	"bufio"
	"encoding/csv"
	"fmt"
	"io"
	"strconv"
)

// csvReader reads one CSV source with encoding/csv. The first record is the
// header; columns are found by header name. Every cell is text: user, event,
// experiment, arm and segments are taken as they are (no trimming), and ts
// is parsed by ParseTimestamp, or as an integer epoch count when the mapping
// names an epoch unit and the cell is a plain integer.
type csvReader struct {
	file   string
	src    *openedSource
	cr     *csv.Reader
	p      *plan
	field  []int // header position of each logical column
	nhead  int   // fields in the header
	row    row
	header []string
}

var utf8BOM = []byte{0xEF, 0xBB, 0xBF}

func newCSVReader(file string, src *openedSource, p *plan) (*csvReader, error) {
	br := bufio.NewReaderSize(io.NewSectionReader(src.r, 0, src.size), 64<<10)
	if b, err := br.Peek(len(utf8BOM)); err == nil && string(b) == string(utf8BOM) {
		br.Discard(len(utf8BOM))
	}
	cr := csv.NewReader(br)
	cr.FieldsPerRecord = -1 // checked here, to report a *RowError
	header, err := cr.Read()
	if err == io.EOF {
		return nil, fmt.Errorf("%s: empty file: want a header row", file)
	}
	if err != nil {
		return nil, fmt.Errorf("%s: %w", file, err)
	}
	cr.ReuseRecord = true // after the header, which is kept

	c := &csvReader{file: file, src: src, cr: cr, p: p, header: header, nhead: len(header)}
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
		if c.field[i] < 0 {
			return nil, missingColumn(file, name, header)
		}
	}
	c.row.cells = make([]cell, len(p.physical))
	return c, nil
}

func (c *csvReader) read(b *batchBuilder, max int, st *Stats) (int, error) {
	n := 0
	for n < max {
		rec, err := c.cr.Read()
		if err == io.EOF {
			return n, io.EOF
		}
		if err != nil {
			// A *csv.ParseError (bare or unclosed quote) names the
			// line and column; keep it whole for errors.As.
			return n, fmt.Errorf("%s: %w", c.file, err)
		}
		st.RowsRead++
		if len(rec) != c.nhead {
			line, _ := c.cr.FieldPos(0)
			return n, &RowError{File: c.file, Row: int64(line), RowGroup: -1, Err: ErrFieldCount,
				Value: strconv.Itoa(len(rec)), wantFields: c.nhead}
		}
		r := &c.row
		for i, j := range c.field {
			r.cells[i] = cell{s: rec[j]}
		}
		r.ts, r.tsErr = c.parseTS(rec[c.field[colTS]])
		if col, reason := c.p.check(r); reason != nil {
			line, _ := c.cr.FieldPos(c.field[col])
			return n, c.p.rowError(c.file, int64(line), -1, r, col, reason)
		}
		b.append(r)
		n++
	}
	return n, nil
}

// parseTS decodes a ts cell; see csvReader.
func (c *csvReader) parseTS(s string) (int64, error) {
	if s == "" {
		return 0, ErrNullTimestamp
	}
	if c.p.epochUnit != 0 {
		if v, err := strconv.ParseInt(s, 10, 64); err == nil {
			ns, ok := fromEpoch(v, c.p.epochUnit)
			if !ok {
				return 0, ErrTimestampRange
			}
			return ns, nil
		}
	}
	return parseTimestamp(s)
}

func (c *csvReader) close() error { return c.src.Close() }
