package ingest

import (
	"bytes"
	"encoding/csv"
	"fmt"
	"io"
)

// The parallel CSV path cuts a file's bytes into chunks that end at record
// boundaries and parses the chunks on several goroutines (csvpar.go).
//
// The boundary rule: in well-formed CSV (RFC 4180, as encoding/csv reads
// it without LazyQuotes) a quote opens a field only at its start and a
// quote inside a quoted field is doubled, so the number of quotes read since
// the start of a record is odd exactly inside a quoted field. A line feed
// after an even number of quotes, counted from a record's start, therefore
// ends a record; one after an odd number is part of a quoted field. Each
// chunk starts at a record boundary, so the count starts at zero there.
//
// In malformed input the rule can cut inside a record, but only after the
// first malformed record, which lies wholly in the chunk that holds its
// start (a cut needs an even count at a line feed, which in the well-formed
// prefix before the fault ends the record). The parse of that chunk meets
// the fault where a single encoding/csv reader meets it, and its error is
// the one that stops the reader; what follows is never handed on.

// csvChunk is a run of whole records of a CSV file.
type csvChunk struct {
	data []byte
	line int // the line on which data starts (1-based; the header is line 1)
	// err, when not nil, is the read error (corrupt gzip data, say) met
	// after data, which then holds every byte read before it, a partial
	// record included.
	err error
}

// csvSplitter reads a CSV stream and cuts it into chunks of about size
// bytes that end at record boundaries (see above).
type csvSplitter struct {
	in    io.Reader
	size  int
	carry []byte // bytes read after the last chunk's end
	line  int    // the line of the next chunk's first byte
	done  bool
}

// next returns the next chunk, or false after the last.
func (s *csvSplitter) next() (csvChunk, bool) {
	if s.done {
		return csvChunk{}, false
	}
	want := max(s.size, 2*len(s.carry), 1)
	buf := make([]byte, len(s.carry), want)
	copy(buf, s.carry)
	s.carry = nil
	for {
		var err error
		buf, err = fill(s.in, buf, want)
		if err != nil {
			s.done = true
			c := csvChunk{data: buf, line: s.line}
			if err != io.EOF {
				c.err = err
			}
			return c, len(buf) > 0 || c.err != nil
		}
		if b := lastBoundary(buf); b >= 0 {
			c := csvChunk{data: buf[:b+1], line: s.line}
			s.carry = append([]byte(nil), buf[b+1:]...)
			s.line += bytes.Count(c.data, []byte{'\n'})
			return c, true
		}
		want *= 2 // a record longer than the chunk
	}
}

// fill reads from in until buf holds want bytes; it returns the error that
// ended the reading early (io.EOF at the end).
func fill(in io.Reader, buf []byte, want int) ([]byte, error) {
	if cap(buf) < want {
		buf = append(make([]byte, 0, want), buf...)
	}
	for len(buf) < want {
		n, err := in.Read(buf[len(buf):want])
		buf = buf[:len(buf)+n]
		if err != nil {
			return buf, err
		}
	}
	return buf, nil
}

// lastBoundary returns the position of the last line feed in buf that ends
// a record, counting quotes from buf's start (a record boundary), or -1.
func lastBoundary(buf []byte) int {
	odd := bytes.Count(buf, []byte{'"'})&1 == 1 // parity at len(buf)
	end := len(buf)
	for {
		j := bytes.LastIndexByte(buf[:end], '\n')
		if j < 0 {
			return -1
		}
		if bytes.Count(buf[j:end], []byte{'"'})&1 == 1 {
			odd = !odd
		}
		if !odd {
			return j
		}
		end = j
	}
}

// csvErrorAt makes an error of encoding/csv, met by a reader that started
// on line line of file, name the file and the file's lines.
func csvErrorAt(file string, line int, err error) error {
	if pe, ok := err.(*csv.ParseError); ok {
		e := *pe
		e.StartLine += line - 1
		e.Line += line - 1
		err = &e
	}
	return fmt.Errorf("%s: %w", file, err)
}

// errAfter is a reader that returns err once r is read.
type errAfter struct {
	r   io.Reader
	err error
}

func (e *errAfter) Read(p []byte) (int, error) {
	n, err := e.r.Read(p)
	if err == io.EOF {
		err = e.err
	}
	return n, err
}
