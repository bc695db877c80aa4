package ingest

import (
	"bytes"
	"encoding/binary"
	"encoding/csv"
	"io"
	"math/bits"
	"strconv"
	"unicode/utf8"
	"unsafe"

	"github.com/apache/arrow-go/v18/arrow"
)

// defaultCSVChunk is the size of the chunks a CSV file is cut into for
// the parallel path.
const defaultCSVChunk = 4 << 20

// csvRecords parses the records of one chunk. Well-formed records are split
// in place (fields point into the chunk); a record that holds anything the
// fast split does not take (a quoted field that spans lines or a quote out
// of place) is read by encoding/csv from that record on, which gives the
// same fields, or the same error, as one encoding/csv reader over the whole
// file.
type csvRecords struct {
	file  string
	data  []byte
	pos   int
	line  int // the line of data[pos]
	comma rune
	delim []byte
	rec   []string
	// recLine is the line of the last record, all on one line unless
	// fieldLines, when lines holds the line of each field of rec.
	recLine    int
	fieldLines bool
	lines      []int
	buf        []byte
	err        error // after data (see csvChunk)
}

func newCSVRecords(file string, c csvChunk, comma rune) *csvRecords {
	var d [utf8.UTFMax]byte
	n := utf8.EncodeRune(d[:], comma)
	return &csvRecords{file: file, data: c.data, line: c.line, comma: comma, delim: d[:n], err: c.err}
}

// next returns the next record, in a slice the next call reuses, and
// io.EOF after the last; other errors name the file and its lines.
func (p *csvRecords) next() ([]string, error) {
	if p.err != nil {
		// A chunk cut short by a read error: encoding/csv reads it
		// all and meets the error where one reader over the file would.
		return p.slow()
	}
	for p.pos < len(p.data) {
		rest := p.data[p.pos:]
		if len(p.delim) == 1 {
			if adv := p.splitPlain(rest, p.delim[0]); adv > 0 {
				p.recLine, p.fieldLines = p.line, false
				p.pos += adv
				p.line++
				if len(p.rec) == 1 && p.rec[0] == "" { // encoding/csv skips empty lines
					continue
				}
				return p.rec, nil
			}
		}
		nl := bytes.IndexByte(rest, '\n')
		var line []byte
		adv := len(rest)
		if nl >= 0 {
			line, adv = rest[:nl], nl+1
		} else {
			line = rest // as encoding/csv before the end, too:
		}
		if len(line) > 0 && line[len(line)-1] == '\r' {
			line = line[:len(line)-1]
		}
		if len(line) == 0 { // encoding/csv skips empty lines
			p.pos += adv
			p.line++
			continue
		}
		if !p.split(line) {
			return p.slow()
		}
		p.recLine, p.fieldLines = p.line, false
		p.pos += adv
		p.line++
		return p.rec, nil
	}
	return nil, io.EOF
}

// lineOf returns the line on which field i of the last record starts.
func (p *csvRecords) lineOf(i int) int {
	if p.fieldLines {
		return p.lines[i]
	}
	return p.recLine
}

// SWAR constants: every byte 0x01, every byte 0x7f.
const (
	bytesOnes = 0x0101010101010101
	bytesLow7 = 0x7f7f7f7f7f7f7f7f
)

// zeroBytes returns v with the high bit set in exactly the bytes of v that
// are zero (the exact form of the test, without the borrow that makes the
// shorter one flag bytes above a zero byte).
func zeroBytes(v uint64) uint64 { return ^(((v & bytesLow7) + bytesLow7) | v | bytesLow7) }

// splitPlain splits the line at the start of rest, with the one-byte
// delimiter d, into p.rec, reading eight bytes at a time for d, line
// feeds and quotes. It returns the bytes the line takes with its line feed,
// or 0 when the line holds a quote (split reads it then). A line that ends
// in CR LF loses the CR; an empty line gives one empty field.
func (p *csvRecords) splitPlain(rest []byte, d byte) int {
	p.rec = p.rec[:0]
	dm := bytesOnes * uint64(d)
	start := 0
	for i := 0; i < len(rest); i += 8 {
		var w uint64
		if i+8 <= len(rest) {
			w = binary.LittleEndian.Uint64(rest[i:])
		} else {
			// The last bytes, padded with zeros, which match none of
			// the three (the delimiter is never NUL, see newPlan).
			var pad [8]byte
			copy(pad[:], rest[i:])
			w = binary.LittleEndian.Uint64(pad[:])
		}
		m := zeroBytes(w^dm) | zeroBytes(w^(bytesOnes*'\n')) | zeroBytes(w^(bytesOnes*'"'))
		for m != 0 {
			j := i + bits.TrailingZeros64(m)>>3
			m &= m - 1
			switch rest[j] {
			case d:
				p.rec = append(p.rec, bstr(rest[start:j]))
				start = j + 1
			case '\n':
				p.rec = append(p.rec, bstr(trimCR(rest[start:j])))
				return j + 1
			default:
				return 0
			}
		}
	}
	p.rec = append(p.rec, bstr(trimCR(rest[start:])))
	return len(rest)
}

// trimCR drops one CR at the end of b.
func trimCR(b []byte) []byte {
	if len(b) > 0 && b[len(b)-1] == '\r' {
		return b[:len(b)-1]
	}
	return b
}

// split splits one line into p.rec and reports whether it could.
func (p *csvRecords) split(line []byte) bool {
	p.rec = p.rec[:0]
	p.buf = p.buf[:0]
	if bytes.IndexByte(line, '"') < 0 {
		for {
			i := bytes.Index(line, p.delim)
			if i < 0 {
				p.rec = append(p.rec, bstr(line))
				return true
			}
			p.rec = append(p.rec, bstr(line[:i]))
			line = line[i+len(p.delim):]
		}
	}
	for {
		if len(line) == 0 || line[0] != '"' {
			i := bytes.Index(line, p.delim)
			f := line
			if i >= 0 {
				f = line[:i]
			}
			if bytes.IndexByte(f, '"') >= 0 {
				return false
			}
			p.rec = append(p.rec, bstr(f))
			if i < 0 {
				return true
			}
			line = line[i+len(p.delim):]
			continue
		}
		f, rest, ok := p.quoted(line[1:])
		if !ok {
			return false
		}
		p.rec = append(p.rec, f)
		if len(rest) == 0 {
			return true
		}
		line = rest[len(p.delim):]
	}
}

// quoted reads a quoted field after its opening quote, within one line. It
// returns the field and the rest of the line, which is empty or starts with
// the delimiter; false when the field does not end well on this line.
func (p *csvRecords) quoted(s []byte) (string, []byte, bool) {
	start := len(p.buf)
	simple := true
	for {
		i := bytes.IndexByte(s, '"')
		if i < 0 {
			return "", nil, false
		}
		after := s[i+1:]
		if len(after) > 0 && after[0] == '"' {
			p.buf = append(p.buf, s[:i+1]...)
			simple = false
			s = after[1:]
			continue
		}
		if len(after) > 0 && !bytes.HasPrefix(after, p.delim) {
			return "", nil, false
		}
		if simple {
			return bstr(s[:i]), after, true
		}
		p.buf = append(p.buf, s[:i]...)
		// p.buf may move when it grows; the string keeps its own array.
		return bstr(p.buf[start:]), after, true
	}
}

// slow reads one record with encoding/csv from p.pos on.
func (p *csvRecords) slow() ([]string, error) {
	var in io.Reader = bytes.NewReader(p.data[p.pos:])
	if p.err != nil {
		in = &errAfter{r: in, err: p.err}
	}
	cr := csv.NewReader(in)
	cr.Comma = p.comma
	cr.FieldsPerRecord = -1
	rec, err := cr.Read()
	if err != nil {
		if err == io.EOF {
			p.pos = len(p.data)
			p.err = nil
			return nil, io.EOF
		}
		return nil, csvErrorAt(p.file, p.line, err)
	}
	p.lines, p.fieldLines = p.lines[:0], true
	for i := range rec {
		l, _ := cr.FieldPos(i)
		p.lines = append(p.lines, p.line+l-1)
	}
	off := int(cr.InputOffset())
	p.line += bytes.Count(p.data[p.pos:p.pos+off], []byte{'\n'})
	p.pos += off
	if p.err != nil {
		// Only the records before the error are read this way: keep
		// reading the rest with encoding/csv.
		p.data = p.data[p.pos:]
		p.pos = 0
	}
	p.rec = rec
	return rec, nil
}

// bstr returns b as a string without copying; b must not change while the
// string is used.
func bstr(b []byte) string { return unsafe.String(unsafe.SliceData(b), len(b)) }

// csvResult is what a worker made of one chunk; see rgResult.
type csvResult struct {
	recs []arrow.RecordBatch
	bad  []badRow
	// badRead and badFilt are the chunk's rows read (the bad row
	// included) and filtered rows as of each bad row.
	badRead  []int64
	badFilt  []filterCount
	rows     int64
	filtered filterCount
	err      error
}

func (res *csvResult) release() {
	for _, rec := range res.recs {
		rec.Release()
	}
	res.recs = nil
}

// csvPipeline runs the chunk workers of one CSV file.
type csvPipeline struct {
	o   *ordered[csvResult] // a task per chunk
	cur csvResult           // the chunk being handed on
}

// start starts the splitter and workers; first is the chunk that held the
// header, from the header's end on. A file cut into blocks has no
// splitter: each worker reads its blocks.
func (c *csvReader) start(workers int, budget bool, first csvChunk) {
	newWorker := func() (*batchBuilder, *row) {
		return newBatchBuilder(c.mem, c.p), &row{cells: make([]cell, len(c.p.physical))}
	}
	if bs := c.blocks; bs != nil {
		c.pl = &csvPipeline{o: startOrdered(workers, bs.produce,
			func(stop <-chan struct{}) (func(csvBlock) csvResult, func()) {
				bld, r := newWorker()
				w := &csvBlockReader{bs: bs}
				return func(b csvBlock) csvResult {
					ch, ok := w.chunk(b, stop)
					if !ok {
						return csvResult{}
					}
					return c.parseChunk(ch, bld, r, budget)
				}, bld.release
			})}
		return
	}
	c.pl = &csvPipeline{o: startOrdered(workers,
		func(emit func(csvChunk) bool) {
			for ch, ok := first, true; ok && emit(ch) && ch.err == nil; ch, ok = c.split.next() {
			}
		},
		func(<-chan struct{}) (func(csvChunk) csvResult, func()) {
			bld, r := newWorker()
			return func(ch csvChunk) csvResult { return c.parseChunk(ch, bld, r, budget) }, bld.release
		})}
}

// parseChunk applies the row rules to the records of a chunk, as read
// does, and puts the kept rows into batches.
func (c *csvReader) parseChunk(ch csvChunk, bld *batchBuilder, r *row, budget bool) (res csvResult) {
	p := newCSVRecords(c.file, ch, c.p.delimiter)
	site := &csvSite{c: c, recs: p}
	defer func() {
		if res.err != nil {
			bld.discard()
		}
	}()
	for {
		rec, err := p.next()
		if err == io.EOF {
			break
		}
		if err != nil {
			res.err = err
			return res
		}
		res.rows++
		var b badRow
		var bad bool
		if len(rec) != c.nhead {
			b = badRow{file: c.file, row: int64(p.lineOf(0)), rowGroup: -1, reason: ErrFieldCount,
				value: strconv.Itoa(len(rec)), wantFields: c.nhead}
			bad = true
		} else {
			c.fill(r, rec)
			if col, reason := c.p.check(r); reason != nil {
				b, bad = site.badAt(r, col, reason), true
				b.value = string([]byte(b.value)) // the chunk's bytes are reused
			}
		}
		if bad {
			res.bad = append(res.bad, b)
			res.badRead = append(res.badRead, res.rows)
			res.badFilt = append(res.badFilt, res.filtered)
			if !budget {
				return res
			}
			continue
		}
		if !c.p.keep(r) {
			res.filtered.add(r.ts)
			continue
		}
		bld.append(r)
		if bld.n == c.batchSize || bld.full() {
			res.recs = append(res.recs, bld.newRecord())
		}
	}
	if bld.n > 0 {
		res.recs = append(res.recs, bld.newRecord())
	}
	return res
}

// csvSite locates the bad rows of a chunk.
type csvSite struct {
	c    *csvReader
	recs *csvRecords
}

func (s *csvSite) badAt(r *row, col int, reason error) badRow {
	return s.c.p.badRow(s.c.file, int64(s.recs.lineOf(max(s.c.field[col], 0))), -1, r, col, reason)
}

// batched reports whether the file is read by the parallel path.
func (c *csvReader) batched() bool { return c.split != nil || c.blocks != nil }

// nextBatch returns the next record batch of the file in order, or io.EOF
// after the last, counting rows and bad rows in a as read does.
func (c *csvReader) nextBatch(workers int, a *accounting) (arrow.RecordBatch, error) {
	if c.pl == nil {
		if c.plDone {
			return nil, io.EOF
		}
		c.start(max(workers, 1), a.budget, c.first)
		c.first = csvChunk{}
	}
	pl := c.pl
	for len(pl.cur.recs) == 0 {
		res, ok := pl.next()
		if !ok {
			c.plDone = true
			c.stop()
			return nil, io.EOF
		}
		if err := res.account(a); err != nil {
			return nil, err
		}
	}
	rec := pl.cur.recs[0]
	pl.cur.recs[0] = nil
	pl.cur.recs = pl.cur.recs[1:]
	return rec, nil
}

// next waits for the next chunk's result and makes it the current one;
// false after the last.
func (pl *csvPipeline) next() (csvResult, bool) {
	res, ok := pl.o.next()
	pl.cur = res
	return res, ok
}

// account counts the chunk's rows and bad rows in a, as the sequential
// reader counts them, and returns the error that stops the reader.
func (res *csvResult) account(a *accounting) error {
	base := a.rowsRead
	for i, b := range res.bad {
		a.rowsRead = base + res.badRead[i]
		if err := a.bad(b); err != nil {
			a.filtered.merge(res.badFilt[i])
			return err
		}
	}
	a.rowsRead = base + res.rows
	a.filtered.merge(res.filtered)
	return res.err
}

// stop stops the splitter and the workers and releases what they made.
func (c *csvReader) stop() {
	pl := c.pl
	if pl == nil {
		return
	}
	c.pl = nil
	pl.o.close(func(res csvResult) { res.release() })
	pl.cur.release()
}
