package ingest

import (
	"bytes"
	"fmt"
	"io"
)

// An uncompressed CSV file is not cut by one goroutine reading it in
// order (csvSplitter): the workers read it themselves. The bytes after the
// header are divided by offset into blocks [from, to) of the chunk size,
// and the worker of a block reads it with ReadAt, counts its quotes and
// line feeds and hands the quote parity and the line number at its end to
// the next block's worker (a chain of one-value channels, so only these
// two numbers pass from block to block, not the bytes). With the parity at
// its start, a worker finds the first record that starts in its block (a
// record starts after a line feed with an even count of quotes since the
// header, see csvsplit.go) and parses the records that start in the
// block, reading on past its end to the end of the last one. So every
// record is parsed by exactly one worker, and the chunks are the ones a
// splitter cutting at those record starts would hand on: the same rows,
// bad rows and errors as one encoding/csv reader, by the argument of
// csvsplit.go. Copying the file into memory, the one step left in order
// before, now runs on every core.

// csvBlockSlack is how far a worker reads past its block at first, to
// find the end of the record that crosses the block's end; it reads on,
// doubling, when the record is longer.
const csvBlockSlack = 4 << 10

// csvPrefix is what the bytes before a block's start say about it: the
// parity of the quotes after the header, and the line of its first byte.
type csvPrefix struct {
	odd  bool
	line int
}

// csvBlock is one block of a file: the bytes [from, to), and the channels
// on which its prefix arrives and its end's is sent.
type csvBlock struct {
	from, to int64
	in       <-chan csvPrefix
	out      chan<- csvPrefix
}

// csvBlocks describes the part of a file that the workers read: from
// start, the first byte after the header, which is on line line, to size.
type csvBlocks struct {
	r     io.ReaderAt
	start int64
	size  int64
	line  int
	block int64
}

// produce passes the blocks to emit in order until emit returns false.
func (bs *csvBlocks) produce(emit func(csvBlock) bool) {
	in := make(chan csvPrefix, 1)
	in <- csvPrefix{line: bs.line}
	for from := bs.start; from < bs.size; from += bs.block {
		out := make(chan csvPrefix, 1)
		if !emit(csvBlock{from: from, to: min(from+bs.block, bs.size), in: in, out: out}) {
			return
		}
		in = out
	}
}

// csvBlockReader is a worker's reader of blocks; its buffer is reused
// from block to block, so a chunk it returns is valid until the next.
type csvBlockReader struct {
	bs  *csvBlocks
	buf []byte
	lo  int64 // the offset of buf[0]
}

// load makes buf hold the bytes [lo, hi) of the file (hi at most size).
func (w *csvBlockReader) load(lo, hi int64) error {
	n := int(hi - lo)
	if cap(w.buf) < n {
		w.buf = make([]byte, n, n+n/4)
	}
	w.buf, w.lo = w.buf[:n], lo
	m, err := w.bs.r.ReadAt(w.buf, lo)
	if m == n {
		return nil
	}
	w.buf = w.buf[:m]
	if err == nil || err == io.EOF {
		err = io.ErrUnexpectedEOF // the file shrank while it was read
	}
	return err
}

// chunk reads block b and returns the records that start in it as a
// chunk (empty when none does), or false when stop closed first.
func (w *csvBlockReader) chunk(b csvBlock, stop <-chan struct{}) (csvChunk, bool) {
	bs := w.bs
	lo := b.from
	if lo > bs.start {
		lo-- // the byte before: does a record start at from?
	}
	err := w.load(lo, min(b.to+csvBlockSlack, bs.size))
	var pre csvPrefix
	select {
	case pre = <-b.in:
	case <-stop:
		return csvChunk{}, false
	}
	if err != nil && w.lo+int64(len(w.buf)) < b.to {
		// The block could not be read: the error is this chunk's, and
		// no later chunk is reached.
		b.out <- pre
		return csvChunk{line: pre.line, err: fmt.Errorf("read: %w", err)}, true
	}
	own := w.buf[b.from-lo : b.to-lo]
	b.out <- csvPrefix{odd: pre.odd != (bytes.Count(own, quoteByte)&1 == 1), line: pre.line + bytes.Count(own, lineFeed)}
	s := b.from
	if b.from > bs.start && (w.buf[0] != '\n' || pre.odd) {
		j := nextRecordStart(own, pre.odd)
		if j < 0 || b.from+int64(j) >= b.to {
			return csvChunk{}, true // every record here started in an earlier block
		}
		s = b.from + int64(j)
	}
	line := pre.line + bytes.Count(w.buf[b.from-lo:s-lo], lineFeed)
	e, err := w.recordEnd(b.to, pre.odd != (bytes.Count(own, quoteByte)&1 == 1))
	return csvChunk{data: w.buf[s-lo : e-lo], line: line, err: err}, true
}

// recordEnd returns the first record start at or after to (the file's size
// when there is none), with odd the quote parity at to, reading on as far
// as it takes. An error reading on is returned with the end of what was
// read.
func (w *csvBlockReader) recordEnd(to int64, odd bool) (int64, error) {
	bs := w.bs
	if to >= bs.size {
		return bs.size, nil
	}
	if w.buf[to-1-w.lo] == '\n' && !odd {
		return to, nil
	}
	for want := int64(csvBlockSlack); ; want *= 2 {
		end := w.lo + int64(len(w.buf))
		if j := nextRecordStart(w.buf[to-w.lo:], odd); j >= 0 {
			return to + int64(j), nil
		}
		if end >= bs.size {
			return bs.size, nil
		}
		// Read on: the record crossing to is longer than what is loaded.
		old := w.buf
		hi := min(end+want, bs.size)
		grown := make([]byte, hi-w.lo)
		copy(grown, old)
		m, err := bs.r.ReadAt(grown[len(old):], end)
		w.buf = grown[:len(old)+m]
		if int64(len(old)+m) < hi-w.lo {
			if err == nil || err == io.EOF {
				err = io.ErrUnexpectedEOF
			}
			return w.lo + int64(len(w.buf)), fmt.Errorf("read: %w", err)
		}
	}
}

var (
	quoteByte = []byte{'"'}
	lineFeed  = []byte{'\n'}
)

// nextRecordStart returns the index just after the first line feed of b
// that ends a record, with odd the quote parity at b's start, or -1.
func nextRecordStart(b []byte, odd bool) int {
	for i := 0; ; {
		j := bytes.IndexByte(b[i:], '\n')
		if j < 0 {
			return -1
		}
		if bytes.Count(b[i:i+j], quoteByte)&1 == 1 {
			odd = !odd
		}
		i += j + 1
		if !odd {
			return i
		}
	}
}
