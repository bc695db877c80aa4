package ingest

import (
	"strconv"
)

// csvReader reads the events of one CSV source, opened by openCSV. The
// first record is the header; columns are found by header name. Every cell
// is text: user, event, experiment, arm and segments are taken as they are
// (no trimming; an integer user id stays the digits written), and ts is
// parsed by plan.parseTSText.
type csvReader struct {
	file  string
	f     *CSVFile
	p     *plan
	field []int // header position of each logical column, -1 for a partition column
	nhead int   // fields in the header
	part  partitionCols
	row   row
}

func newCSVReader(src Source, o *openedSource, p *plan) (*csvReader, error) {
	f, err := openCSV(src.Name, o, p.delimiter)
	if err != nil {
		return nil, err
	}
	c := &csvReader{file: src.Name, f: f, p: p, nhead: len(f.Header())}
	c.field = make([]int, len(p.physical))
	for i, name := range p.physical {
		if c.field[i], err = f.column(name); err != nil {
			return nil, err
		}
		if c.field[i] < 0 && !c.part.set(p, src, i) {
			return nil, missingColumn(src.Name, name, f.Header(), src.partitionKeys())
		}
	}
	c.row.cells = make([]cell, len(p.physical))
	return c, nil
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
		c.part.fill(r)
		for i, j := range c.field {
			if j >= 0 {
				r.cells[i] = cell{s: rec[j]}
			}
		}
		if j := c.field[colTS]; j >= 0 {
			r.ts, r.tsErr = c.p.parseTSText(rec[j])
		}
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

func (c *csvReader) close() error { return c.f.Close() }
