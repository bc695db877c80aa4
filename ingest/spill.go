package ingest

import (
	"bufio"
	"encoding/binary"
	"errors"
	"fmt"
	"hash/maphash"
	"io"
	"math"
	"os"
	"path/filepath"
	"unsafe"

	"github.com/apache/arrow-go/v18/arrow"
	"github.com/apache/arrow-go/v18/arrow/array"
	"github.com/apache/arrow-go/v18/arrow/memory"
)

// Spill holds the rows of an event table on disk, split into partitions
// by a hash of the user column: every row of a unit lands in the same
// partition, so each partition can be tallied on its own, one after
// another, and the tallies merged (see experiment.MergeTallies). Memory
// then grows with the units of the largest group of partitions tallied at
// once rather than with all units.
//
// The rows are written in a compact binary form (per column, in schema
// order: ts as 8 bytes little-endian; text as a uvarint of length+1, 0 for
// null, then the bytes), one file per partition, in a fresh folder that
// Close removes. The folder also holds a marker file naming the owning
// process (its id and, on Linux, its start time), so that a later run can
// tell a folder left by a killed process from one in use: see
// RemoveStaleSpills. A Spill is not safe for concurrent use.
type Spill struct {
	dir    string
	schema *arrow.Schema
	seed   maphash.Seed
	parts  []*spillPart
	maxTS  int64
	rows   int64
	buf    []byte
	closed bool
}

type spillPart struct {
	path string
	f    *os.File
	w    *bufio.Writer
	rows int64
}

// NewSpill makes a Spill of n partitions (1 to 4096) for record batches of
// schema, the logical event table of a Reader (user, ts, event first), in a
// new folder inside dir ("" is the system's temporary folder), named
// armtally-spill-* and holding the marker file of RemoveStaleSpills.
func NewSpill(dir string, n int, schema *arrow.Schema) (*Spill, error) {
	if n < 1 || n > 4096 {
		return nil, fmt.Errorf("spill: %d partitions: want 1 to 4096", n)
	}
	if schema.NumFields() < 3 || schema.Field(colTS).Type.ID() != arrow.TIMESTAMP {
		return nil, fmt.Errorf("spill: schema %v is not an event table", schema)
	}
	for i, f := range schema.Fields() {
		if i != colTS && f.Type.ID() != arrow.STRING {
			return nil, fmt.Errorf("spill: column %q is %v, want utf8", f.Name, f.Type)
		}
	}
	d, err := os.MkdirTemp(dir, spillPrefix+"*")
	if err != nil {
		return nil, fmt.Errorf("spill: %w", err)
	}
	s := &Spill{dir: d, schema: schema, seed: maphash.MakeSeed(), maxTS: math.MinInt64}
	if err := writeSpillMarker(d); err != nil {
		s.Close()
		return nil, fmt.Errorf("spill: %w", err)
	}
	for i := range n {
		path := filepath.Join(d, fmt.Sprintf("part-%04d.rows", i))
		f, err := os.Create(path)
		if err != nil {
			s.Close()
			return nil, fmt.Errorf("spill: %w", err)
		}
		s.parts = append(s.parts, &spillPart{path: path, f: f, w: bufio.NewWriterSize(f, 64<<10)})
	}
	return s, nil
}

// Dir returns the folder holding the partition files.
func (s *Spill) Dir() string { return s.dir }

// Partitions returns the number of partitions.
func (s *Spill) Partitions() int { return len(s.parts) }

// Rows returns the number of rows written to partition p.
func (s *Spill) Rows(p int) int64 { return s.parts[p].rows }

// MaxTS returns the largest ts written, and false when no row was.
func (s *Spill) MaxTS() (int64, bool) { return s.maxTS, s.rows > 0 }

// Add writes the rows of rec, a batch of the Spill's schema, each to the
// partition of its user.
func (s *Spill) Add(rec arrow.RecordBatch) error {
	if !rec.Schema().Equal(s.schema) {
		return fmt.Errorf("spill: batch schema %v, want %v", rec.Schema(), s.schema)
	}
	n := int(rec.NumRows())
	cols := make([]*array.String, rec.NumCols())
	for i := range cols {
		if i != colTS {
			cols[i] = rec.Column(i).(*array.String)
		}
	}
	ts := rec.Column(colTS).(*array.Timestamp).TimestampValues()
	for i := 0; i < n; i++ {
		b := s.buf[:0]
		for c, col := range cols {
			if c == colTS {
				b = binary.LittleEndian.AppendUint64(b, uint64(ts[i]))
				continue
			}
			if col.IsNull(i) {
				b = binary.AppendUvarint(b, 0)
				continue
			}
			v := col.Value(i)
			b = binary.AppendUvarint(b, uint64(len(v))+1)
			b = append(b, v...)
		}
		s.buf = b
		p := s.parts[maphash.String(s.seed, cols[colUser].Value(i))%uint64(len(s.parts))]
		if _, err := p.w.Write(b); err != nil {
			return fmt.Errorf("spill: writing %s: %w", p.path, err)
		}
		p.rows++
		s.rows++
		s.maxTS = max(s.maxTS, int64(ts[i]))
	}
	return nil
}

// Reader returns a reader of partition p's rows as record batches of at
// most batchSize rows (0: DefaultBatchSize), allocated from mem (nil:
// memory.DefaultAllocator), in the order they were added. Call it after the
// last Add.
func (s *Spill) Reader(p int, mem memory.Allocator, batchSize int) (*SpillReader, error) {
	if p < 0 || p >= len(s.parts) {
		return nil, fmt.Errorf("spill: no partition %d", p)
	}
	part := s.parts[p]
	if err := part.w.Flush(); err != nil {
		return nil, fmt.Errorf("spill: writing %s: %w", part.path, err)
	}
	f, err := os.Open(part.path)
	if err != nil {
		return nil, fmt.Errorf("spill: %w", err)
	}
	if mem == nil {
		mem = memory.DefaultAllocator
	}
	if batchSize <= 0 {
		batchSize = DefaultBatchSize
	}
	logical := make([]string, s.schema.NumFields())
	for i, f := range s.schema.Fields() {
		logical[i] = f.Name
	}
	r := &SpillReader{schema: s.schema, path: part.path, f: f, in: bufio.NewReaderSize(f, 64<<10), left: part.rows,
		bld: newBatchBuilder(mem, &plan{logical: logical, schema: s.schema}), batchSize: batchSize}
	r.row.cells = make([]cell, len(logical))
	r.close = r.Close
	return r, nil
}

// Close removes the partition files and their folder.
func (s *Spill) Close() error {
	if s.closed {
		return nil
	}
	s.closed = true
	var errs []error
	for _, p := range s.parts {
		errs = append(errs, p.f.Close())
	}
	errs = append(errs, os.RemoveAll(s.dir))
	return errors.Join(errs...)
}

// SpillReader reads one partition of a Spill back as record batches; it
// has the methods of Reader that a tally loop uses and is an
// array.RecordReader.
type SpillReader struct {
	batchState
	schema    *arrow.Schema
	path      string
	f         *os.File
	in        *bufio.Reader
	left      int64
	bld       *batchBuilder
	batchSize int
	row       row
	text      [][]byte
}

// Next reads the next batch; it returns false at the end or on an error.
func (r *SpillReader) Next() bool {
	if !r.advance() || r.left == 0 {
		return false
	}
	if r.text == nil {
		r.text = make([][]byte, len(r.row.cells))
	}
	n := 0
	for ; n < r.batchSize && r.left > 0; n++ {
		if err := r.readRow(); err != nil {
			r.bld.discard()
			r.err = fmt.Errorf("spill: reading %s: %w", r.path, err)
			return false
		}
		r.bld.append(&r.row)
		r.left--
	}
	r.rec = r.bld.newRecord()
	return true
}

func (r *SpillReader) readRow() error {
	for c := range r.row.cells {
		if c == colTS {
			var b [8]byte
			if _, err := io.ReadFull(r.in, b[:]); err != nil {
				return err
			}
			r.row.ts = int64(binary.LittleEndian.Uint64(b[:]))
			continue
		}
		l, err := binary.ReadUvarint(r.in)
		if err != nil {
			return err
		}
		if l == 0 {
			r.row.cells[c] = cell{null: true}
			continue
		}
		if l-1 > maxBatchBytes {
			return fmt.Errorf("a value of %d bytes: the file is corrupt", l-1)
		}
		if uint64(cap(r.text[c])) < l-1 {
			r.text[c] = make([]byte, l-1)
		}
		buf := r.text[c][:l-1]
		if _, err := io.ReadFull(r.in, buf); err != nil {
			return err
		}
		// The cell points into the reused buffer: append copies it.
		r.row.cells[c] = cell{s: unsafe.String(unsafe.SliceData(buf), len(buf))}
	}
	return nil
}

// Schema returns the schema of the record batches, the Spill's.
func (r *SpillReader) Schema() *arrow.Schema { return r.schema }

// Close releases the current batch and closes the partition file. Calls
// after the first do nothing.
func (r *SpillReader) Close() error {
	if !r.shut() {
		return nil
	}
	r.bld.release()
	return r.f.Close()
}
