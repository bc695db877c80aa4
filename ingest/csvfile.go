package ingest

import (
	"bufio"
	"compress/gzip"
	"encoding/csv"
	"fmt"
	"io"
)

// CSVFile is a CSV source opened for reading with encoding/csv, its header
// read. Data that starts with gzip's magic number (0x1f 0x8b) is
// decompressed on the fly, whatever the source's name (concatenated gzip
// members are read one after another); a leading UTF-8 byte-order mark is
// dropped. Fields are separated by the delimiter given to OpenCSV, may be
// quoted (a quoted field may hold the delimiter, doubled quotes and line
// ends), and lines may end in LF or CRLF. Records may have any number of
// fields. It is the one opener of CSV files: the event reader, the table
// readers and callers such as a data profile all read through it.
type CSVFile struct {
	name   string
	src    *openedSource
	gz     *gzip.Reader // nil unless the data is gzip-compressed
	cr     *csv.Reader
	header []string
}

// gzipMagic is the first two bytes of a gzip member (RFC 1952, 2.3.1).
var gzipMagic = [2]byte{0x1f, 0x8b}

var utf8BOM = []byte{0xEF, 0xBB, 0xBF}

// OpenCSV opens a CSV source and reads its header. delimiter separates
// fields; 0 means ','. Errors name the source.
func OpenCSV(src Source, delimiter rune) (*CSVFile, error) {
	o, err := src.open()
	if err != nil {
		return nil, err
	}
	f, err := openCSV(src.Name, o, delimiter)
	if err != nil {
		o.Close()
		return nil, err
	}
	return f, nil
}

// openCSV is OpenCSV on an opened source; on an error the caller closes o
// (a gzip.Reader holds nothing else to close).
func openCSV(name string, o *openedSource, delimiter rune) (*CSVFile, error) {
	f := &CSVFile{name: name, src: o}
	br, gz, err := openCSVStream(name, o)
	if err != nil {
		return nil, err
	}
	f.gz = gz
	f.cr = csv.NewReader(br)
	if delimiter != 0 {
		f.cr.Comma = delimiter
	}
	f.cr.FieldsPerRecord = -1 // checked by the callers, to report a *RowError
	header, err := f.cr.Read()
	if err == io.EOF {
		return nil, fmt.Errorf("%s: empty file: want a header row", name)
	}
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	f.header = header
	f.cr.ReuseRecord = true // after the header, which is kept
	return f, nil
}

// openCSVStream returns the bytes of an opened CSV source: decompressed
// when they start with gzip's magic number, without a leading UTF-8
// byte-order mark. gz is the gzip reader, or nil.
func openCSVStream(name string, o *openedSource) (br *bufio.Reader, gz *gzip.Reader, err error) {
	var in io.Reader = io.NewSectionReader(o.r, 0, o.size)
	var magic [2]byte
	if n, _ := o.r.ReadAt(magic[:], 0); n == len(magic) && magic == gzipMagic {
		gz, err = gzip.NewReader(in)
		if err != nil {
			return nil, nil, fmt.Errorf("%s: gzip: %w", name, err)
		}
		in = gz
	}
	br = bufio.NewReaderSize(in, 64<<10)
	if b, err := br.Peek(len(utf8BOM)); err == nil && string(b) == string(utf8BOM) {
		br.Discard(len(utf8BOM))
	}
	return br, gz, nil
}

// Header returns the header row; the slice is the file's.
func (f *CSVFile) Header() []string { return f.header }

// Gzipped reports whether the data is gzip-compressed.
func (f *CSVFile) Gzipped() bool { return f.gz != nil }

// Read returns the next record, in a slice that the next call reuses, and
// io.EOF after the last. Other errors name the file: a *csv.ParseError
// (a bare or unclosed quote; it names the line and column, and is kept for
// errors.As) or a gzip error (corrupt data, a bad checksum).
func (f *CSVFile) Read() ([]string, error) {
	rec, err := f.cr.Read()
	if err != nil && err != io.EOF {
		return nil, fmt.Errorf("%s: %w", f.name, err)
	}
	return rec, err
}

// Line returns the line (1-based; the header is line 1) on which field i
// of the last record read starts.
func (f *CSVFile) Line(i int) int {
	line, _ := f.cr.FieldPos(i)
	return line
}

// column returns the position of name in the header, or -1 when it is not
// there, and a *ColumnError when the header names it twice.
func (f *CSVFile) column(name string) (int, error) { return headerColumn(f.name, f.header, name) }

// headerColumn returns the position of name in the header of file, or -1
// when it is not there, and a *ColumnError when the header names it twice.
func headerColumn(file string, header []string, name string) (int, error) {
	at := -1
	for j, h := range header {
		if h != name {
			continue
		}
		if at >= 0 {
			return -1, &ColumnError{File: file, Column: name, Err: ErrColumnType,
				Detail: "the header names it more than once"}
		}
		at = j
	}
	return at, nil
}

// Close closes the file.
func (f *CSVFile) Close() error {
	if f.gz != nil {
		f.gz.Close() // it holds nothing of the source's
	}
	return f.src.Close()
}
